"""Schema-driven fuzzing of every operation, in process: no server errors, every response as documented.

schemathesis runs its examples, coverage and fuzzing phases over every operation of the published
document, with bodies in application/json and application/msgpack (tests/fuzz/hooks.py), and
asks for answers in JSON or MessagePack (the Accept header is derived from the case, so a replay
asks the same way; MessagePack answers can carry a NaN that JSON would silently turn into null).
Every call is counted; the last test checks that the run reached every operation in both
formats, got computed (200) answers to bodies of both formats, and made at least 1,000 calls.

One check is left out, for a reason the schema cannot express: `positive_data_acceptance`
expects every schema-valid body to be accepted, but some rules are about values together, not
fields alone (as many weights as values, k + 1 edges for k counts, not every weight zero,
probabilities summing to 1, no null under the reject policy, the resampling budget), and one is
about the content of a string: float64 bytes must decode from base64 to a whole number of
8-byte values, all finite (JSON Schema's contentEncoding is an annotation, not an assertion).
Those bodies get a documented 400 or 422 problem naming the field, which is the intended
answer; `hooks.problem_names_the_field`, added to the checks, makes sure it names one.

Bugs a fuzz run finds are listed in hooks.KNOWN_WARNINGS and hooks.KNOWN_ANSWERS, with the
exact signature that identifies each (the service function where a numpy RuntimeWarning
escaped, or the answer member that carried a NaN or infinity), while they are open: a case
showing such a signature is rejected (not counted) and tallied; anything else fails. Open bugs
are pinned below by strict xfails; when one passes, remove its entry in hooks and keep its case
as a regression test. Every bug pinned here so far is fixed and kept below as a regression test
(test_fixed_bug_*); none is open.
"""

from __future__ import annotations

import collections
import logging
import traceback
import zlib
from pathlib import Path

import msgspec
import pytest
import schemathesis
from hypothesis import HealthCheck, note, reject, settings
from litestar.testing import TestClient
from schemathesis.specs.openapi.checks import positive_data_acceptance

from tailgauge.api import create_app
from tailgauge.settings import Settings
from tests.fuzz import hooks

# A small resampling budget keeps generated interval requests quick; over it is a 422.
SETTINGS = Settings(max_resample_work=2_000_000, request_log=False)
schema = schemathesis.openapi.from_asgi("/openapi.json", create_app(SETTINGS))
EXAMPLES_PER_OPERATION = 200  # the fuzzing phase's budget; the coverage phase adds its own cases
MINIMUM_CASES = 1_000
ACCEPT = (None, "application/json", "application/msgpack")
SERVICE = Path(__file__).resolve().parents[2] / "service"

# (operation, request media type, response media type, status) -> calls that passed every check
CALLS: collections.Counter[tuple[str, str | None, str | None, int]] = collections.Counter()
KNOWN_HITS: collections.Counter[str] = collections.Counter()


class _UnhandledError(logging.Handler):
    """Keeps the exception behind the last 500 (problems.handle_unexpected logs it)."""

    def __init__(self) -> None:
        super().__init__(logging.ERROR)
        self.error: BaseException | None = None

    def emit(self, record: logging.LogRecord) -> None:
        if record.exc_info:
            self.error = record.exc_info[1]


UNHANDLED = _UnhandledError()
logging.getLogger("tailgauge.api").addHandler(UNHANDLED)


_ASKED: collections.Counter[str] = collections.Counter()


def accept_for(case) -> str | None:
    """The Accept header for ``case``: a function of the case alone, so a replay asks the same way.

    An operation without a request body has few distinct cases (which ones depends on the
    generator's set ordering, so on the hash seed), and one hash could pick the same Accept for
    all of them: those operations take the Accept values in turn instead, so every run asks each
    of them in every format.
    """
    if "requestBody" not in case.operation.definition.raw:
        label = case.operation.label
        _ASKED[label] += 1
        return ACCEPT[(_ASKED[label] - 1) % len(ACCEPT)]
    seen = (case.method, case.path, case.query, dict(case.headers or {}), case.media_type, case.body)
    return ACCEPT[zlib.crc32(repr(seen).encode()) % len(ACCEPT)]


def with_fixed_seeds(case) -> None:
    """Give every interval request without a seed one derived from the case.

    A null seed makes the server draw one (service/tailgauge/api/endpoints.py), so the same generated case
    could resample differently on a replay and a failure found once could not be reproduced.
    Null seeds themselves are covered by tests/api/test_intervals.py.
    """
    body = case.body
    if not isinstance(body, dict) or not isinstance(body.get("options"), dict):
        return
    interval = body["options"].get("interval")
    if isinstance(interval, dict) and interval.get("seed") is None:
        interval["seed"] = zlib.crc32(repr(body).encode())


def warning_site(error: BaseException | None) -> tuple[str, str] | None:
    """(file, function) of the innermost service frame where a RuntimeWarning was raised."""
    if not isinstance(error, RuntimeWarning):
        return None
    site, trace = None, error.__traceback__
    while trace is not None:
        code = trace.tb_frame.f_code
        if Path(code.co_filename).resolve().is_relative_to(SERVICE):
            site = (Path(code.co_filename).name, code.co_name)
        trace = trace.tb_next
    return site


def known_bug(response) -> str | None:
    """The known bug this response shows: its exact signature in hooks.KNOWN_WARNINGS or KNOWN_ANSWERS."""
    if response.status_code == 500:
        return hooks.KNOWN_WARNINGS.get(warning_site(UNHANDLED.error))
    media = (response.headers.get("content-type") or [""])[0].split(";")[0]
    if response.status_code == 200 and media in ("application/json", *hooks.MSGPACK_TYPES):
        decode = msgspec.msgpack.decode if media in hooks.MSGPACK_TYPES else msgspec.json.decode
        return hooks.known_answer_bug(decode(response.content), media)
    return None


@schema.parametrize()
@settings(
    max_examples=EXAMPLES_PER_OPERATION,
    deadline=None,
    derandomize=True,
    database=None,
    suppress_health_check=list(HealthCheck),
)
def test_every_operation_answers_as_documented(case):
    accept = accept_for(case)
    headers = {"Accept": accept} if accept else None
    with_fixed_seeds(case)
    UNHANDLED.error = None
    response = case.call(headers=headers)
    bug = known_bug(response)
    if response.status_code == 500 and bug is None and UNHANDLED.error is not None:
        note("server traceback:\n" + "".join(traceback.format_exception(UNHANDLED.error)))
    if bug is not None:
        KNOWN_HITS[bug] += 1
        reject()
    case.validate_response(
        response,
        headers=headers,
        transport_kwargs={"headers": headers} if headers else None,
        excluded_checks=[positive_data_acceptance],
        additional_checks=[hooks.problem_names_the_field, hooks.answer_is_finite],
    )
    content_type = (response.headers.get("content-type") or [None])[0]
    answered = content_type and content_type.split(";")[0]
    CALLS[(case.operation.label, case.media_type, answered, response.status_code)] += 1


JSON_ANSWERS = {"application/json", "application/problem+json"}
MSGPACK_ANSWERS = {"application/msgpack", "application/problem+msgpack"}


def test_each_example_answers_as_documented_in_messagepack():
    """Each operation's own request example, sent as MessagePack, is one more call of the run.

    The fuzzing phase rarely builds a valid body where the fields a body needs depend on a tag (a
    histogram's layout decides which bounds and counts it takes), and the examples phase sends the
    example in the one media type the document gives it: so the MessagePack form of each example is
    sent here, checked and counted like any generated case.
    """
    sent = 0
    for result in schema.get_all_operations():
        operation = result.ok()
        content = operation.definition.raw.get("requestBody", {}).get("content", {})
        example = content.get("application/json", {}).get("example")
        if example is None or "application/msgpack" not in content:
            continue
        case = operation.Case(body=example, media_type="application/msgpack")
        headers = {"Accept": "application/msgpack"}
        response = case.call(headers=headers)
        assert response.status_code == 200, (operation.label, response.content[:300])
        case.validate_response(
            response, headers=headers, transport_kwargs={"headers": headers},
            excluded_checks=[positive_data_acceptance],
            additional_checks=[hooks.problem_names_the_field, hooks.answer_is_finite],
        )
        CALLS[(operation.label, case.media_type, "application/msgpack", response.status_code)] += 1
        sent += 1
    assert sent >= 6


def test_the_run_reached_every_operation_in_both_formats(request, fuzz_summary):
    fuzz_name = test_every_operation_answers_as_documented.__name__
    operations = {result.ok().label: result.ok() for result in schema.get_all_operations()}
    if sum(item.originalname == fuzz_name for item in request.session.items) < len(operations):
        pytest.skip(f"counts the whole fuzz run: select every operation of {fuzz_name}")
    total = sum(CALLS.values())
    lines = [f"schemathesis in process: {total} calls passed every check"]
    for label, operation in sorted(operations.items()):
        calls = {key: n for key, n in CALLS.items() if key[0] == label}
        lines.append(f"  {label}: {sum(calls.values())}")
        assert calls, f"{label} was never called"
        for media_type in operation.definition.raw.get("requestBody", {}).get("content", {}):
            sent = sum(n for key, n in calls.items() if key[1] == media_type)
            computed = sum(n for key, n in calls.items() if key[1] == media_type and key[3] == 200)
            lines.append(f"    {media_type} bodies: {sent}, {computed} answered 200")
            # A body that never decodes (as when the MessagePack hook sent a form) never gets a 200.
            assert computed, f"no {media_type} body to {label} was ever computed"
        documented = {m for r in operation.definition.raw["responses"].values() for m in r.get("content", {})}
        if documented & MSGPACK_ANSWERS:
            answered = {key[2] for key in calls}
            assert answered & MSGPACK_ANSWERS and answered & JSON_ANSWERS, (label, answered)
    lines += [f"  rejected as known bug {bug}: {n}" for bug, n in sorted(KNOWN_HITS.items())]
    fuzz_summary.extend(lines)  # printed at the end of the session (conftest.py)
    assert total >= MINIMUM_CASES, f"only {total} calls"


# ---- Bugs this run found, now fixed: each case is kept as a regression test ----


def _answer(path: str, body: dict, accept: str = "application/json"):
    with TestClient(create_app(Settings(request_log=False))) as client:
        return client.post(path, json=body, headers={"accept": accept})


def test_fixed_bug_1_bootstrap_weights_near_the_float64_limit():
    """Weights 1e308 and 0.5 are not whole counts, so entries are resampled uniformly keeping
    their weights; a resample drawing the 1e308 entry twice weighs 2e308. Any answer but a
    crash will do: a 200 (intervals null with a reason) or a 422 naming the weights."""
    body = {
        "outcomes": [{"value": 0.0, "weight": 1e308}, {"value": 1.0, "weight": 0.5}],
        "weight_kind": "counts",
        "options": {"interval": {"resamples": 100, "seed": 1}},
    }
    response = _answer("/v1/descriptors/table", body)
    assert response.status_code in (200, 422), response.text


def test_fixed_bug_3_tail_contributions_of_a_tiny_weight_far_out():
    """An outcome holding a share of 2.5e-318 of the weight lies ~1e159 standard deviations out;
    its square overflows (describe then reports not_representable, but the warning escapes)."""
    body = {
        "outcomes": [
            {"value": 4.472702397143185e-203, "weight": 7.008848605026543e-303},
            {"value": -5.2480276680547656e16, "weight": 2838558868497665.0},
        ],
        "weight_kind": "counts",
        "options": {"convention": "population"},
    }
    response = _answer("/v1/descriptors/table", body)
    assert response.status_code == 200, response.text


def test_fixed_bug_4_standard_error_of_hedges_g_is_never_nan():
    """n2 = 1.8e308 makes d about -2.2e154, so d * d is inf and sqrt(inf / inf) is NaN; JSON
    shows null with no warning naming it, MessagePack shows the NaN."""
    body = {
        "first": {"kind": "samples", "values": [34, 41, 38, 45, 52, 39, 36, 48, 61, 40, 37, 44]},
        "second": {"kind": "table", "outcomes": [{"value": 0.0, "weight": 1.7976931348623157e308}], "weight_kind": "counts"},
        "options": {"probabilities": [0.5, 0.9]},
    }
    response = _answer("/v1/comparisons", body, accept="application/msgpack")
    assert response.status_code == 200, response.text
    assert hooks.non_finite_paths(msgspec.msgpack.decode(response.content)) == []


def test_fixed_bug_5_hedges_g_when_n1_plus_n2_overflows():
    """Two tables of total weight 1e308 each: m = n1 + n2 - 2 is inf, J(inf) is NaN, and both go
    out as degrees_of_freedom and correction_factor (null in JSON with no warning naming them)."""
    side = {"kind": "table", "weight_kind": "counts", "outcomes": [{"value": 0.0, "weight": 5e307}, {"value": 1.0, "weight": 5e307}]}
    response = _answer("/v1/comparisons", {"first": side, "second": side}, accept="application/msgpack")
    assert response.status_code == 200, response.text
    assert hooks.non_finite_paths(msgspec.msgpack.decode(response.content)) == []


def test_fixed_bug_6_bca_acceleration_of_values_spanning_300_decades():
    """Found by the long run (tests/fuzz/long_run.py): values [-1, 0, 1e-300] with a BCa interval.
    Some descriptor's jackknife influences reach ~1e300 relative to the replicates' scale, so
    influence**3 overflows in acceleration() (RuntimeWarning; a 500 here)."""
    response = _answer("/v1/descriptors/samples", {"values": [-1.0, 0.0, 1e-300], "options": {"interval": {"resamples": 200, "seed": 1}}})
    assert response.status_code == 200, response.text


def test_fixed_bug_7_jackknife_of_weights_with_a_wide_range():
    """Found by the long run: weights [1e17, 0.5, 0.5, 0.5] with a BCa interval. Leaving out the
    1e17 entry, total - 1e17 rounds to 0 (the 1.5 is below 1e17's spacing of 16), so the
    jackknife row's mean is 0 / 0, computed outside evaluate()'s errstate (a 500 here; in
    production the jackknife is called undefined and BCa falls back to percentile)."""
    body = {"values": [1.0, 2.0, 3.0, 4.0], "weights": [1e17, 0.5, 0.5, 0.5], "options": {"interval": {"resamples": 200, "seed": 1}}}
    response = _answer("/v1/descriptors/samples", body)
    assert response.status_code == 200, response.text


def test_fixed_bug_8_classical_interval_at_a_level_within_rounding_of_one():
    """Found by this run after BCa's fallback at such levels was fixed (b19ac94): the student_t
    interval of the mean is (-inf, inf), written as null in JSON where the schema says number."""
    body = {"values": [251.2, 249.8, 250.4, 252.9, 250.1], "options": {"interval": {"level": 0.9999999999999999, "resamples": 200, "seed": 3}}}
    response = _answer("/v1/descriptors/samples", body, accept="application/msgpack")
    assert response.status_code == 200, response.text
    assert hooks.non_finite_paths(msgspec.msgpack.decode(response.content)) == []


def test_fixed_bug_9_an_outlier_beyond_float64_standard_deviations():
    """Found by the long run (make fuzz, seed 8) after bug 3's fix: a weight of 1e-38 at -1e308
    beside 1e308 counts at 0 and 1. Its share of the weight underflows, so the standard deviation
    is that of the bulk (0.5) and the outlier lies 2e308 standard deviations out: the division
    in tail.contributions overflows (a RuntimeWarning; a 500 here)."""
    body = {
        "outcomes": [{"value": -1e308, "weight": 1e-38}, {"value": 0.0, "weight": 5e307}, {"value": 1.0, "weight": 5e307}],
        "weight_kind": "counts",
    }
    response = _answer("/v1/descriptors/table", body)
    assert response.status_code == 200, response.text


def test_fixed_bug_10_resampling_plan_of_a_far_outlier():
    """Found by the long run: one observation at -1e100 beside 1e308 counts at 0 and 1e307 at 1,
    with a percentile interval. In the plan's scaled units the outlier's deviation is about 1e100
    times the spread, and its fourth power in np.vander(deviations, 5) overflows."""
    body = {
        "outcomes": [{"value": -1e100, "weight": 1.0}, {"value": 0.0, "weight": 1e308}, {"value": 1.0, "weight": 1e307}],
        "weight_kind": "counts",
        "options": {"interval": {"method": "percentile", "resamples": 200, "seed": 1}},
    }
    response = _answer("/v1/descriptors/table", body)
    assert response.status_code == 200, response.text


# ---- Bug 11, found by make fuzz after bugs 9 and 10 were fixed; fixed too ----


def test_fixed_bug_11_jackknife_power_sums_of_weights_near_the_float64_limit():
    """Found by the long run (make fuzz, seed 8) after bugs 9 and 10 were fixed: counts 1e308 at 0
    and 1e306 at 10 with a BCa interval. The jackknife's power sums (_LeaveOneOut.__init__,
    base @ powers) weigh scaled deviations above 1 by weights summing to ~1e308 and overflow (a
    RuntimeWarning; a 500 here). The percentile interval, without the jackknife, answers."""
    body = {
        "outcomes": [{"value": 0.0, "weight": 1e308}, {"value": 10.0, "weight": 1e306}],
        "weight_kind": "counts",
        "options": {"interval": {"resamples": 200, "seed": 1}},
    }
    response = _answer("/v1/descriptors/table", body)
    assert response.status_code == 200, response.text
