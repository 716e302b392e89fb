"""A typed Python client of the Tailgauge service, blocking (:class:`Client`) or asyncio (:class:`AsyncClient`).

Part of the base install (``pip install tailgauge``: numpy, scipy, msgspec, datasketches, httpx;
no server libraries). Requests and answers are the service's own msgspec Structs
(``tailgauge.api.schemas``) and each method's path comes from the service's operation table,
so the client cannot drift from the published contract::

    import numpy as np
    from tailgauge.client import Client, ProblemError

    with Client("http://127.0.0.1:8000") as client:
        answer = client.describe_samples(values=np.array([251.2, 249.8, 250.4]),
                                         options={"probabilities": [0.5]})
        print(answer.descriptors["mean"].value)

* One method per operation: ``describe_samples``, ``describe_table``, ``describe_bins``,
  ``merge_states``, ``compare``, ``catalog``, ``metrics``, ``live``, ``ready``; ``call(id, ...)``
  reaches any operation of the table by its id. A request is given whole (a request Struct or a
  dict) or as keyword fields.
* numpy arrays in ``values``, ``weights`` and ``counts`` travel as float64 bytes in MessagePack;
  partial states (``tailgauge.core.partial_state``) and KLL sketch bytes can be sent as they are.
* A problem answer raises :class:`ProblemError` (``status``, ``type``, ``title``, ``detail``,
  ``errors`` with JSON paths, ``retry_after``, ``request_id``); network failures and timeouts
  raise httpx's exceptions (``httpx.TimeoutException``, ``httpx.TransportError``).
* A connection reset before any answer is resent once (safe: every compute request is a pure
  function of its body); nothing else is retried.
"""

from tailgauge.client.asynchronous import AsyncClient
from tailgauge.client.sync import Client
from tailgauge.client.wire import DEFAULT_TIMEOUT, DEFAULT_URL, ProblemError, float64_bytes

__all__ = ["DEFAULT_TIMEOUT", "DEFAULT_URL", "AsyncClient", "Client", "ProblemError", "float64_bytes"]
