"""Requests at and beyond the resampling budget against the real server: BCa quantiles of many
distinct values, BCa on many bins, the bag of little bootstraps and a comparison at the budget,
the advice of a refusal resent, and the largest figures of a million values; first, that the
memory setting the bounds rest on is in force. Each is answered within the bounds or refused at
once with a 422 that, where asked, says what would fit.

Every case that uses the ``hostile`` server runs inside ``hostile_case``
(tests/system/hostile_harness.py), which also checks, whatever the case asserts, that no worker
crashed or restarted, that ``GET /health/live`` answered within 1 s throughout, that nothing
answered 5xx, and that each worker's peak RSS stayed under the memory bound.

No outside reference values: the resample counts at the budget are worked out beside them from
today's budget of 1e9 rows.

Run the hostile-input suite alone with ``python -m pytest tests/system/test_hostile*.py -rA``
(or ``make hostile``; ``-s`` shows one line per case: statuses, times and each worker's peak RSS).
"""

from __future__ import annotations

import re
from functools import cache

import numpy as np

from .hostile_harness import (
    MEMORY_SETTING,
    MEMORY_VARIABLE,
    MSGPACK_HEADERS,
    PROMPT,
    SAMPLES,
    Answer,
    MiB,
    hostile_case,
    msgpack,
)

LIMIT_EXCEEDED = "urn:tailgauge:problem:limit-exceeded"
ADVICE = re.compile(r"at most (\d[\d,_]*)")
TABLE = "/v1/descriptors/table"


def _limit_refusal(answer: Answer, label: str, *, prompt: bool = True) -> dict:
    """Assert ``answer`` is a 422 limit-exceeded (within PROMPT s when ``prompt``) and return it."""
    problem = answer.problem()
    assert answer.status == 422 and problem.get("type") == LIMIT_EXCEEDED, (
        f"{label}: expected 422 {LIMIT_EXCEEDED}, got {answer.shown()}")
    if prompt:
        assert answer.seconds < PROMPT, f"{label}: refused only after {answer.seconds:.1f} s, not at once"
    return problem


def _advice(problem: dict) -> str | None:
    texts = [problem.get("detail", ""), *(e.get("message", "") for e in problem.get("errors", []))]
    return next((text for text in texts if ADVICE.search(text)), None)


@cache
def _distinct_values(n: int, seed: int) -> bytes:
    """``n`` distinct values (float64 little-endian bytes): lognormal order values, seeded."""
    values = np.random.default_rng(seed).lognormal(3.0, 0.6, n)
    assert np.unique(values).size == n
    return values.astype("<f8").tobytes()


PROBABILITIES = [round((i + 0.5) / 1000, 6) for i in range(1000)]


def _interval(method: str, resamples: int, seed: int = 7) -> dict:
    return {"method": method, "resamples": resamples, "seed": seed}


# ---- 0. the setting the memory bounds rest on ----------------------------------------------


def test_memory_setting_is_in_force(hostile):
    assert hostile.memory_setting_applied, (
        f"the server refused {MEMORY_VARIABLE}={MEMORY_SETTING} ({hostile.refusal}); it runs without it, "
        f"so no case below can count on the per-request memory limit")
    print(f"[hostile] idle baseline VmRSS {hostile.baseline / MiB:.0f} MiB; "
          f"peak bound {hostile.rss_bound / MiB:.0f} MiB")


# ---- 2. resampled quantiles of many distinct values, BCa ---------------------------------


def _samples(values: bytes, interval: dict, probabilities: list[float] | None = None) -> bytes:
    options: dict = {"interval": interval}
    if probabilities is not None:
        options["probabilities"] = probabilities
    return msgpack({"values": values, "options": options})


def test_bca_quantiles_of_20000_values_fit_or_are_refused_with_advice(hostile):
    body = _samples(_distinct_values(20_000, 1), _interval("bca", 100), PROBABILITIES)
    with hostile_case(hostile, "2 bca 20k values x 1000 probabilities") as case:
        answer = case.call("20k-x-1000", "POST", SAMPLES, body, MSGPACK_HEADERS)
        assert answer.status in (200, 422), answer.shown()
        if answer.status == 422:
            problem = _limit_refusal(answer, "20k x 1000 bca")
            assert _advice(problem), f"the refusal does not say what would fit: {problem}"


def test_bca_quantiles_of_100000_values_are_refused_at_once(hostile):
    body = _samples(_distinct_values(100_000, 2), _interval("bca", 100), PROBABILITIES)
    with hostile_case(hostile, "2 bca 100k values x 1000 probabilities") as case:
        answer = case.call("100k-x-1000", "POST", SAMPLES, body, MSGPACK_HEADERS)
        _limit_refusal(answer, "100k x 1000 bca")


# ---- 3. bins with BCa ----------------------------------------------------------------------


def _bins(k: int, seed: int) -> bytes:
    counts = np.random.default_rng(seed).integers(1, 60, k).astype("<f8")
    edges = [round(10.0 + 0.25 * i, 2) for i in range(k + 1)]
    return msgpack({"edges": edges, "counts": counts.tobytes(), "options": {"interval": _interval("bca", 100)}})


def test_bca_on_5000_bins_fits_or_is_refused_with_advice(hostile):
    with hostile_case(hostile, "3 bca 5000 bins") as case:
        answer = case.call("5000-bins", "POST", "/v1/descriptors/bins", _bins(5_000, 3), MSGPACK_HEADERS)
        assert answer.status in (200, 422), answer.shown()
        if answer.status == 422:
            problem = _limit_refusal(answer, "5000 bins bca")
            assert _advice(problem), f"the refusal does not say what would fit: {problem}"


def test_bca_on_100000_bins_never_fails(hostile):
    with hostile_case(hostile, "3 bca 100000 bins") as case:
        answer = case.call("100000-bins", "POST", "/v1/descriptors/bins", _bins(100_000, 4), MSGPACK_HEADERS)
        assert answer.status in (200, 422), answer.shown()
        if answer.status == 422:
            _limit_refusal(answer, "100000 bins bca")


# ---- 4. the bag of little bootstraps at today's largest resamples --------------------------

# 2e6 distinct values: little bootstraps of ceil(2e6 ** 0.7) = 25,760 rows; 38,820 resamples (a
# multiple of the 20 subsets) is the largest count today's budget of 1e9 rows admits.
BLB_RESAMPLES = 38_820
# Two inputs of 1e6 distinct values, 15,849 subset rows each: 31,540 is the largest multiple of 20
# with 31,540 x 2 x 15,849 <= 1e9.
COMPARISON_RESAMPLES = 31_540


def test_little_bootstraps_at_the_budget_are_refused_at_once(hostile):
    body = _samples(_distinct_values(2_000_000, 5), _interval("bca", BLB_RESAMPLES))
    with hostile_case(hostile, "4 bca 2M values, 38820 resamples") as case:
        answer = case.call("2M-bca", "POST", SAMPLES, body, MSGPACK_HEADERS)
        _limit_refusal(answer, f"2e6 values, bca, {BLB_RESAMPLES} resamples")


def test_comparison_at_the_budget_is_refused_at_once(hostile):
    body = msgpack({
        "first": {"kind": "samples", "values": _distinct_values(1_000_000, 6)},
        "second": {"kind": "samples", "values": _distinct_values(1_000_000, 8)},
        "options": {"interval": _interval("bca", COMPARISON_RESAMPLES)},
    })
    with hostile_case(hostile, "4 comparison 2 x 1M values, 31540 resamples") as case:
        answer = case.call("2x1M-bca", "POST", "/v1/comparisons", body, MSGPACK_HEADERS)
        _limit_refusal(answer, f"comparison of 2 x 1e6 values, bca, {COMPARISON_RESAMPLES} resamples")


# ---- 5. the advice of a refusal is accepted ------------------------------------------------


def test_advised_resamples_are_not_refused_for_the_same_limit(hostile):
    """A count table of 50 outcomes with 1,000 probabilities and 1e6 resamples: the replicates
    alone would take gigabytes, so the refusal names the resamples that fit; resent with that
    count it is answered (about a second of work)."""
    outcomes = [{"value": float(v), "weight": float(1 + (7 * v) % 90)} for v in range(50)]

    def body(resamples: int) -> bytes:
        return msgpack({
            "outcomes": outcomes, "weight_kind": "counts",
            "options": {"interval": _interval("percentile", resamples), "probabilities": PROBABILITIES},
        })

    with hostile_case(hostile, "5 advice of a refusal") as case:
        first = case.call("1e6-resamples", "POST", TABLE, body(1_000_000), MSGPACK_HEADERS)
        problem = _limit_refusal(first, "table of 50, 1000 probabilities, 1e6 resamples")
        advice = next((e["message"] for e in problem.get("errors", [])
                       if e.get("path") == "$.options.interval.resamples" and ADVICE.search(e["message"])),
                      None) or _advice(problem)
        assert advice, f"no 'at most N' advice for $.options.interval.resamples: {problem}"
        advised = int(re.sub(r"[,_]", "", ADVICE.search(advice)[1]))
        assert 100 <= advised < 1_000_000, f"advice {advised} from {problem}"
        again = case.call(f"advised-{advised}", "POST", TABLE, body(advised), MSGPACK_HEADERS)
        refused_again = again.status == 422 and again.problem().get("type") == LIMIT_EXCEEDED and any(
            e.get("path") == "$.options.interval.resamples" for e in again.problem().get("errors", []))
        assert not refused_again, f"resent with the advised {advised} resamples: {again.shown()}"
        assert again.status == 200, f"resent with the advised {advised} resamples: {again.shown()}"


# ---- 11b. the largest figures of a million values --------------------------------------------


def test_largest_figures_of_a_million_values_are_drawn_with_bounded_memory(hostile):
    """1e6 distinct values (2e6 pass this suite's 225 MiB per request before any drawing), every
    descriptor, drawn at the largest size as PNG and as SVG: each a 200 within the suite-wide
    bounds (RSS, liveness, no 5xx); the figure is drawn from the histogram and at most 512 points,
    never from the values."""
    figure = {"title": "a million bags", "unit": "g", "width": 2400, "height": 1800}
    body = msgpack({"values": _distinct_values(1_000_000, 11), "options": {"figure": figure}})
    with hostile_case(hostile, "11b largest figures of 1M values") as case:
        for media, magic in (("image/png", b"\x89PNG\r\n\x1a\n"), ("image/svg+xml", b"<?xml")):
            answer = case.call(f"1M-{media}", "POST", SAMPLES, body, {**MSGPACK_HEADERS, "Accept": media})
            assert answer.status == 200, answer.shown()
            assert answer.body.startswith(magic), answer.shown()
