"""Recipe: a partial state and a KLL sketch of every chunk of a Dask array, for the merge endpoint.

Each chunk is summarised by the task that holds it, so only a state (a few numbers) and a sketch
(a few kilobytes) per chunk travel; the states merge exactly (mean, variance, skewness, kurtosis, moments, extremes) and the sketches
give quantiles within their stated rank error::

    import dask.array as da
    from tailgauge.core import combine_sketches, describe_state, merge_states, DescribeOptions
    from tailgauge.recipes.dask_states import chunk_summaries

    fill_weights = da.random.default_rng(7).normal(250.0, 4.0, size=1_000_000, chunks=50_000)
    states, sketches = chunk_summaries(fill_weights)
    summary = describe_state(merge_states(states), DescribeOptions(), combine_sketches(sketches))

(tests/core/test_dask_recipe.py runs this example as written.) To have the service describe
them, send them with the client (``tailgauge.client``): :func:`describe_chunks` does both steps,
and the states and sketches travel as MessagePack::

    from tailgauge.client import Client

    with Client("http://127.0.0.1:8000") as client:
        answer = describe_chunks(client, fill_weights, options={"probabilities": [0.05, 0.5, 0.95]})
    print(answer.descriptors.standard_deviation.value, answer.sketches.normalized_rank_error)

Every element of a chunk is one value, whatever the array's shape. Missing values are rejected
by ``partial_state``: mask them first (``x[~da.isnan(x)]``) if the data have any. Needs ``dask``:
install the ``dask`` extra (``pip install 'tailgauge[dask]'``); the service itself does not, and
neither does the rest of the base install (the core, the client) this recipe runs on.
"""

from __future__ import annotations

from typing import TYPE_CHECKING, Any

import dask
import numpy as np

from tailgauge.core import PartialState, kll_sketch_bytes, partial_state
from tailgauge.core.sketches import DEFAULT_K

if TYPE_CHECKING:
    from tailgauge.api.schemas import MergedDescriptionResponse
    from tailgauge.client import Client


def _summarise(block: np.ndarray, order: int, k: int) -> tuple[PartialState, bytes]:
    return partial_state(block, order), kll_sketch_bytes(block, k)


def chunk_summaries(
    array, *, order: int = 4, k: int = DEFAULT_K, scheduler: str | None = None
) -> tuple[list[PartialState], list[bytes]]:
    """``(states, sketches)``, one of each per chunk of the Dask ``array``, in chunk order.

    One task per chunk computes both from the same values, so each chunk is read once.
    ``scheduler`` is passed to ``dask.compute`` (``None``: dask's default, threads for arrays).
    """
    tasks = [dask.delayed(_summarise)(block, order, k) for block in array.to_delayed().ravel()]
    results = dask.compute(*tasks, scheduler=scheduler)
    return [state for state, _ in results], [sketch for _, sketch in results]


def describe_chunks(
    client: Client,
    array,
    *,
    order: int = 4,
    k: int = DEFAULT_K,
    options: Any = None,
    scheduler: str | None = None,
) -> MergedDescriptionResponse:
    """The service's description of the whole Dask ``array`` from its chunks' states and sketches.

    ``client`` is a :class:`tailgauge.client.Client`; ``options`` the merge endpoint's options (a
    dict or ``tailgauge.api.schemas.MergeOptions``); the rest as in :func:`chunk_summaries`. A
    problem answer raises ``tailgauge.client.ProblemError``.
    """
    states, sketches = chunk_summaries(array, order=order, k=k, scheduler=scheduler)
    fields: dict[str, Any] = {"states": states, "sketches": sketches}
    if options is not None:
        fields["options"] = options
    return client.merge_states(**fields)
