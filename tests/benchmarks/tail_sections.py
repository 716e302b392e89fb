"""The ``tails`` section of run.py: what exceedances, tail means, trimmed means and Hill's index
add to a description that sorts the data anyway, in passes over the sorted data.

One pass is measured as ``np.cumsum`` over the n sorted values (reading and writing n doubles),
beside np.sort. The sides run in turn within each round (timing.alternate); the added time of a
side is its median within-round excess over the same description without the tail options,
divided by the pass. Printed, never asserted (the machines are shared and noisy).
"""

from __future__ import annotations

import statistics

import numpy as np
from timing import NA, alternate, record


def _with(core, names: list[str], **tails):
    """DescribeOptions computing ``names`` (a selection that sorts the data) with the tail options
    ``tails``, or why this tree has none."""
    import dataclasses

    fields = {f.name for f in dataclasses.fields(core.DescribeOptions)}
    if not set(tails) <= fields or not hasattr(core, "choose"):
        return f"{NA}: no tail options"
    try:
        return core.DescribeOptions(descriptors=core.choose(names), **tails)
    except Exception as error:  # noqa: BLE001 - an older tree's selection does not know the names
        return f"n/a ({type(error).__name__}: {str(error)[:80]})"


def bench_tails(quick: bool, size: str = "") -> None:
    from tailgauge import core

    n = int(float(size)) if size else (200_000 if quick else 2_000_000)
    rounds = 5 if quick else 9
    x = np.random.default_rng(20261205).lognormal(4.6, 0.6, n)
    ordered = np.sort(x)
    thresholds = tuple(float(t) for t in np.quantile(x, np.linspace(0.5, 0.999, 100)))
    base = ["quantiles", "modes"]  # the modes need the sorted support: every side sorts
    options = {
        "describe(quantiles, modes)": _with(core, base),
        "+ 100 exceedances": _with(core, base + ["exceedances"], thresholds=thresholds),
        "+ tail means at 0.95, 0.99": _with(core, base + ["tail_means"], tail_levels=(0.95, 0.99)),
        "+ both": _with(core, base + ["exceedances", "tail_means"], thresholds=thresholds, tail_levels=(0.95, 0.99)),
        "+ trimmed, winsorized, Hill": _with(core, base + ["trimmed_mean", "winsorized_mean", "upper_tail_index"]),
    }
    sides: dict[str, object] = {
        "np.sort": lambda: np.sort(x),
        "one pass (np.cumsum of the sorted values)": lambda: np.cumsum(ordered),
    }
    for label, chosen in options.items():
        sides[label] = chosen if isinstance(chosen, str) else (
            lambda chosen=chosen: core.describe(core.from_array(x), chosen, kind="samples")
        )
    result = alternate(sides, rounds)
    print(f"tails: {n:.0e} lognormal values, 100 thresholds, 2 tail levels; {rounds} alternating rounds")
    for label in sides:
        print(result.show(label, "np.sort" if label != "np.sort" else None))
    reference = "describe(quantiles, modes)"
    passes = result.times.get("one pass (np.cumsum of the sorted values)")
    base_times = result.times.get(reference)
    for label in list(options)[1:]:
        times = result.times.get(label)
        if not (times and base_times and passes):
            print(f"  {label:<44} {result.failed.get(label, NA)}")
            record("tails", f"{label} on {n:.0e} values: added time in passes over the sorted data", None, "",
                   "<= 1 pass", result.failed.get(label, NA))
            continue
        added = statistics.median((t - b) / p for t, b, p in zip(times, base_times, passes))
        print(f"  {label:<44} adds {added:5.2f} passes over the sorted data (median of rounds)")
        target = "<= 1 pass" if label != "+ trimmed, winsorized, Hill" else ""
        record("tails", f"{label} on {n:.0e} values: added time in passes over the sorted data", added, "passes", target)
