"""Fuzzing the KLL sketch parser (``tailgauge.core.sketches.read_kll_sketch``) against the native decoder.

Usage (from the repository root; ``make fuzz-sketches`` runs it with CASES and SEED):
    python -m tests.fuzz.sketch_fuzz --cases 100000 --seed 1

Valid sketches are built by the ``datasketches`` library itself (the seeds): doubles and floats,
empty, one item, a few items, every level count that ``k = 8`` reaches by 2**22 (about four
million) items, k from 8 to 1000, level zero sorted or not, values with ties, signed zeros,
subnormals and magnitudes near the float limits, and sketches after merges (including merges of
a smaller k, which leave ``min_k < k``). Each case is a seed with one to three mutations: bit
flips, bytes overwritten with 0x00/0x01/0x7F/0x80/0xFE/0xFF, truncations, extensions (by whole
items and by odd amounts), splices of two sketches, header fields overwritten at every header
offset (each field with its own boundary values: 0, 1, the largest, the sign bit, off by one,
the capacity and its neighbours for level offsets), and items overwritten with NaN, infinities,
the extremes, zeros and neighbours; one case in twenty is a seed unchanged.

For every case the parser runs in this process and must either accept or raise
``UncomputableInput``; any other exception is a failure. Every case it accepts is then decoded
by the native decoder of the item type the parser decided (an empty sketch by both) in a child
process (two workers by default, fed in batches over pipes): a child that dies is reported with
the case it was decoding and its signal, and is replaced; a child that raises, or reads other
items, weights, n, k, extremes or rank error than the parser, is a mismatch. (Weights are
compared item by item where the library's Python iterator gets them right, and always through
the library's inclusive CDF at every distinct item: that iterator gives every item weight 1
when level zero is empty, which merges produce.) ``--probe-rejected
F`` also sends a fraction F of the rejected cases to the native decoder, to count how often it
would crash on them or accept what the parser refuses (the parser is stricter: it also checks
values, sortedness and the levels against n, which the library does not).

The library's compaction draws random bits that it does not let a caller seed, so ``--seed``
fixes the values and the mutations but not which items the seeds retain: every failure is
printed with its bytes (hex), which reproduce it.

Cost, measured once by hand (not in the tests: ``timeit``, best of 5, on the shared 2-core
development machine, so +-30%), per sketch, ``read_kll_sketch`` / the native
``deserialize`` alone / ``deserialize`` plus reading the items and weights out through the
library's Python iterator (what ``combine_sketches`` did before):

    single item, 16 bytes                          4 us /  0.1 us /  1.4 us
    k = 200, 100 items (one level), 840 bytes     23 us /  0.2 us /  5.5 us
    k = 200, n = 1e6 (13 levels, 614 items)       35 us /  0.2 us / 32 us   (floats: 34 / 0.2 / 32)
    k = 8, n = 4e6 (18 levels, 139 items)         37 us /  0.2 us /  8.8 us

So the checks cost some tens of microseconds per sketch, about what getting the items out of
the native object cost before; against the native decoder alone they are 100-200 times slower,
still far below the rest of a merge request.
"""

from __future__ import annotations

import argparse
import dataclasses
import multiprocessing
import re
import struct
import sys
import time
import traceback
import warnings

import datasketches
import numpy as np

from tailgauge.core.sketches import KllSketchContents, UncomputableInput, read_kll_sketch

DECODERS = {"double": datasketches.kll_doubles_sketch, "float": datasketches.kll_floats_sketch}
BOUNDARY_BYTES = (0x00, 0x01, 0x7F, 0x80, 0xFE, 0xFF)
PROBE_OUTCOMES = {"ok": "accepted by the native decoder", "raised": "refused by the native decoder",
                  "crashed": "crashed the native decoder", "hung": "hung the native decoder"}
CHILD_TIMEOUT = 60.0


# --- seeds: valid sketches from the library ------------------------------------------------------


@dataclasses.dataclass(frozen=True)
class Seed:
    label: str
    blob: bytes


def _levels(blob: bytes) -> int:
    return blob[18] if len(blob) > 20 and blob[0] == 5 else int(len(blob) > 8)


def seed_sketches(seed: int, max_exponent: int = 22) -> list[Seed]:
    """Valid sketches of both item types, built by the library: every form, and every level count
    that k = 8 reaches by 2**max_exponent items."""
    rng = np.random.default_rng([seed, 0])
    seeds: list[Seed] = []

    def add(label: str, sketch) -> None:
        seeds.append(Seed(label, bytes(sketch.serialize())))

    for item_type, cls in DECODERS.items():
        cast = np.float32 if item_type == "float" else np.float64
        for k in (8, 200):
            add(f"{item_type} k={k} empty", cls(k))
            one = cls(k)
            one.update(float(rng.normal()))
            add(f"{item_type} k={k} one item", one)
        # Every level count k = 8 reaches, each first time it appears and once sorted.
        grow, total, seen = cls(8), 0, set()
        for exponent in range(1, max_exponent + 1):
            fresh = rng.lognormal(0.0, 2.0, 2**exponent - total).astype(cast)
            grow.update(fresh)
            total = 2**exponent
            blob = bytes(grow.serialize())
            if _levels(blob) not in seen:
                seen.add(_levels(blob))
                seeds.append(Seed(f"{item_type} k=8 n={total} levels={_levels(blob)}", blob))
        for k, n in ((8, 2), (8, 9), (9, 40), (11, 1000), (30, 5000), (200, 3), (200, 201), (200, 70_000),
                     (1000, 50_000)):
            sketch = cls(k)
            sketch.update(rng.normal(0.0, 1.0, n).astype(cast))
            add(f"{item_type} k={k} n={n}", sketch)
            sketch.get_quantile(0.5)  # sorts level zero, which the flags then say
            add(f"{item_type} k={k} n={n} level zero sorted", sketch)
        for name, values in (
            ("ties", rng.integers(0, 3, 3000).astype(cast)),
            ("signed zeros", np.array([0.0, -0.0] * 600, dtype=cast)),
            ("subnormals", (rng.random(500) * 1e-310).astype(np.float64) if cast is np.float64
             else (rng.random(500) * 1e-40).astype(np.float32)),
            ("near the limits", np.array([np.finfo(cast).max, np.finfo(cast).min, 1.0] * 100, dtype=cast)),
        ):
            sketch = cls(20)
            sketch.update(values)
            add(f"{item_type} k=20 {name}", sketch)
        for k_into, k_from in ((200, 8), (8, 200), (100, 100)):
            into, other = cls(k_into), cls(k_from)
            into.update(rng.normal(0.0, 1.0, 20_000).astype(cast))
            other.update(rng.normal(5.0, 1.0, 30_000).astype(cast))
            into.merge(other)
            add(f"{item_type} k={k_into} after merging k={k_from}", into)
    return seeds


# --- mutations -------------------------------------------------------------------------------------


def _header_fields(blob: bytes) -> list[tuple[int, int]]:
    """(offset, width) of every header field present in the bytes, level offsets included."""
    fields = [(0, 1), (1, 1), (2, 1), (3, 1), (4, 2), (6, 1), (7, 1)]
    if len(blob) >= 20:
        fields += [(8, 8), (16, 2), (18, 1), (19, 1)]
        levels = blob[18]
        fields += [(20 + 4 * i, 4) for i in range(levels) if 24 + 4 * i <= len(blob)]
    return [(o, w) for o, w in fields if o + w <= len(blob)]


def _field_values(rng, original: int, width: int, blob: bytes) -> list[int]:
    top = (1 << (8 * width)) - 1
    sign = 1 << (8 * width - 1)
    flipped = original ^ (1 << int(rng.integers(8 * width)))
    values = [0, 1, 2, top, top - 1, sign, sign - 1, original + 1, original - 1, flipped,
              int.from_bytes(rng.bytes(width), "little")]
    if width == 4 and len(blob) >= 20:  # level offsets: near the capacity and the other offsets
        present = range(min(blob[18], (len(blob) - 20) // 4))
        offsets = [int.from_bytes(blob[20 + 4 * i: 24 + 4 * i], "little") for i in present]
        values += offsets + [o + d for o in offsets[-1:] for d in (-2, 2, 8, 1000)] + [0xFFFFFFFF]
    if width == 2:
        values += [7, 8, 65535, original * 2]
    return [v & top for v in values]


def _item_span(blob: bytes) -> tuple[int, int] | None:
    """(start, item size) of the min/max/items region, guessed from the seed's own layout."""
    if len(blob) in (12, 16):
        return 8, len(blob) - 8
    if len(blob) < 20 or blob[0] != 5:
        return None
    start = 20 + 4 * blob[18]
    try:
        return start, 8 if read_kll_sketch(blob).item_type == "double" else 4
    except UncomputableInput:  # already mutated: guess from the length
        return start, 8 if (len(blob) - start) % 8 == 0 else 4


def mutate_once(rng, blob: bytes, seeds: list[Seed]) -> tuple[str, bytes]:
    size = len(blob)
    kind = rng.choice(["flip", "boundary", "truncate", "extend", "splice", "field", "field", "item"])
    if kind == "flip" and size:
        data = bytearray(blob)
        flips = []
        for _ in range(int(rng.integers(1, 5))):
            # Half the flips land in the first 64 bytes, where the header and level offsets are.
            at = int(rng.integers(min(size, 64))) if rng.random() < 0.5 else int(rng.integers(size))
            bit = int(rng.integers(8))
            data[at] ^= 1 << bit
            flips.append(f"{at}.{bit}")
        return f"flip bits {','.join(flips)}", bytes(data)
    if kind == "boundary" and size:
        at = int(rng.integers(min(size, 64))) if rng.random() < 0.6 else int(rng.integers(size))
        value = int(rng.choice(BOUNDARY_BYTES))
        return f"byte {at} = {value:#04x}", blob[:at] + bytes([value]) + blob[at + 1:]
    if kind == "truncate" and size:
        cut = int(rng.choice([0, 1, 7, 8, 12, 16, 19, 20, 21, 24, size - 1, size - 4, size - 8,
                              int(rng.integers(size))]))
        cut = min(max(cut, 0), size - 1)
        return f"truncate to {cut}", blob[:cut]
    if kind == "extend":
        whole_items = [4 * int(rng.integers(1, 40)), 8 * int(rng.integers(1, 40))]
        extra = int(rng.choice([1, 3, 4, 8, 12, 16, *whole_items]))
        filler = rng.choice(["zeros", "ones", "random", "copy"])
        tail = {"zeros": bytes(extra), "ones": b"\xff" * extra,
                "random": rng.bytes(extra), "copy": (blob * (extra // max(size, 1) + 1))[:extra]}[filler]
        return f"extend by {extra} ({filler})", blob + tail
    if kind == "splice":
        other = seeds[int(rng.integers(len(seeds)))].blob
        cut_a = int(rng.integers(size + 1))
        cut_b = int(rng.integers(len(other) + 1)) if rng.random() < 0.5 else min(cut_a, len(other))
        return f"splice {cut_a} + other[{cut_b}:]", blob[:cut_a] + other[cut_b:]
    if kind == "field":
        fields = _header_fields(blob)
        if fields:
            offset, width = fields[int(rng.integers(len(fields)))]
            original = int.from_bytes(blob[offset: offset + width], "little")
            values = _field_values(rng, original, width, blob)
            value = values[int(rng.integers(len(values)))]
            return (f"field at {offset} ({width} bytes) {original} -> {value}",
                    blob[:offset] + value.to_bytes(width, "little") + blob[offset + width:])
    if kind == "item":
        span = _item_span(blob) if rng.random() < 0.9 else None
        if span is not None and span[0] + span[1] <= size:
            start, width = span
            count = (size - start) // width
            index = int(rng.integers(count))
            fmt = "<d" if width == 8 else "<f"
            present = [struct.unpack_from(fmt, blob, start + width * i)[0] for i in range(count)]
            with np.errstate(over="ignore", invalid="ignore"):
                choices = [np.nan, np.inf, -np.inf, 0.0, -0.0, present[0], present[min(1, count - 1)],
                           present[int(rng.integers(count))], np.nextafter(present[0], -np.inf),
                           np.nextafter(present[min(1, count - 1)], np.inf)]
            value = choices[int(rng.integers(len(choices)))]
            try:
                packed = struct.pack(fmt, value)
            except OverflowError:  # a double outside float range: write the float infinity instead
                packed = struct.pack(fmt, np.copysign(np.inf, value))
            at = start + width * index
            return f"item {index} = {value!r}", blob[:at] + packed + blob[at + width:]
    return "unchanged", blob


def make_case(seed: int, index: int, seeds: list[Seed]) -> tuple[str, bytes]:
    """Case ``index`` of a run: a seed and one to three mutations, all drawn from ``(seed, index)``."""
    rng = np.random.default_rng([seed, 1, index])
    base = seeds[int(rng.integers(len(seeds)))]
    if rng.random() < 0.05:
        return base.label, base.blob
    blob, steps = base.blob, []
    for _ in range(int(rng.choice([1, 1, 1, 2, 3]))):
        step, blob = mutate_once(rng, blob, seeds)
        steps.append(step)
    return f"{base.label} | {' | '.join(steps)}", blob


# --- the native decoder in child processes ---------------------------------------------------------


def _native_read(item_type: str, blob: bytes):
    """The native decoder's reading: k, n, extremes, items, iterator weights, CDF at every item, error.

    The library's Python iterator gives every item weight 1 when level zero is empty (its
    iterator starts at level zero and only moves up on reaching a level's end), which merges
    produce; so the weights are also read through the library's own CDF at every distinct item,
    which sums the levels correctly.
    """
    try:
        sketch = DECODERS[item_type].deserialize(blob)
        pairs = list(sketch)
        items = np.array([v for v, _ in pairs], dtype=np.float64)
        weights = np.array([w for _, w in pairs], dtype=np.float64)
        empty = sketch.is_empty()
        cdf = np.array(sketch.get_cdf(np.unique(items).tolist(), True)[:-1]) if items.size else np.empty(0)
        low = None if empty else float(sketch.get_min_value())
        high = None if empty else float(sketch.get_max_value())
        return ("ok", int(sketch.k), int(sketch.n), empty, low, high,
                items.tobytes(), weights.tobytes(), cdf.tobytes(), float(sketch.normalized_rank_error(False)))
    except Exception as error:  # noqa: BLE001 - any refusal is a finding, reported by the parent
        return ("raised", f"{type(error).__name__}: {error}")


def _child(connection) -> None:
    while True:
        batch = connection.recv()
        if batch is None:
            return
        for case_id, item_type, blob in batch:
            types = ("double", "float") if item_type is None else (item_type,)
            connection.send((case_id, [_native_read(t, blob) for t in types]))


class NativeWorkers:
    """Child processes that decode with the native library; a crash is attributed to its case."""

    def __init__(self, workers: int):
        self._context = multiprocessing.get_context("forkserver")
        self._context.set_forkserver_preload(["datasketches", "numpy"])
        self._workers = [self._start() for _ in range(workers)]
        self.restarts = 0

    def _start(self):
        parent, child = self._context.Pipe()
        process = self._context.Process(target=_child, args=(child,), daemon=True)
        process.start()
        child.close()
        return process, parent

    def decode(self, cases: list[tuple[int, str | None, bytes]]) -> dict[int, object]:
        """{case id: [native result per type]} or ("crashed", exit code) / ("hung", seconds)."""
        results: dict[int, object] = {}
        pending = [cases[i:: len(self._workers)] for i in range(len(self._workers))]
        while any(pending):
            for slot, batch in enumerate(pending):
                if batch:
                    self._workers[slot][1].send(batch)
            for slot, batch in enumerate(pending):
                if not batch:
                    continue
                process, connection = self._workers[slot]
                done = 0
                try:
                    while done < len(batch):
                        if not connection.poll(CHILD_TIMEOUT):
                            process.kill()
                            raise TimeoutError
                        case_id, answer = connection.recv()
                        results[case_id] = answer
                        done += 1
                    pending[slot] = []
                except (EOFError, ConnectionResetError, TimeoutError) as error:
                    process.join()
                    crashed = batch[done][0]
                    results[crashed] = ("hung", CHILD_TIMEOUT) if isinstance(error, TimeoutError) else (
                        "crashed", process.exitcode)
                    connection.close()
                    self._workers[slot] = self._start()
                    self.restarts += 1
                    pending[slot] = batch[done + 1:]
        return results

    def close(self) -> None:
        for process, connection in self._workers:
            try:
                connection.send(None)
            except (BrokenPipeError, OSError):
                pass
            process.join(timeout=10)
            if process.is_alive():
                process.kill()
                process.join()


def cumulative_fractions(contents: KllSketchContents) -> np.ndarray:
    """Weight of the items <= each distinct item, over n: the library's inclusive CDF, from our reading."""
    if contents.items.size == 0:
        return np.empty(0)
    order = np.argsort(contents.items, kind="stable")
    ordered = contents.items[order]
    cumulative = np.cumsum(contents.weights[order])
    last = np.searchsorted(ordered, np.unique(ordered), side="right") - 1
    return cumulative[last] / float(contents.n)


def compare(ours: KllSketchContents, native) -> str | None:
    """Why the native reading differs from ours, or None when it reads the same sketch."""
    if isinstance(native, tuple):
        return f"native decoder {native[0]} ({native[1]})"
    for answer in native:
        if answer[0] != "ok":
            return f"native decoder refused: {answer[1]}"
        _, k, n, empty, low, high, items, weights, cdf, error = answer
        items, weights, cdf = np.frombuffer(items), np.frombuffer(weights), np.frombuffer(cdf)
        if (k, n, empty) != (ours.k, ours.n, ours.n == 0):
            return f"k, n, empty: native {(k, n, empty)}, ours {(ours.k, ours.n, ours.n == 0)}"
        if error != ours.normalized_rank_error:
            return f"rank error: native {error}, ours {ours.normalized_rank_error}"
        if ours.n and (struct.pack("<dd", low, high) != struct.pack("<dd", ours.minimum, ours.maximum)):
            return f"extremes: native {(low, high)}, ours {(ours.minimum, ours.maximum)}"
        if items.tobytes() != ours.items.tobytes():
            return f"items differ ({items.size} native, {ours.items.size} ours)"
        level_zero_filled = ours.weights.size and ours.weights[0] == 1.0
        if level_zero_filled and weights.tobytes() != ours.weights.tobytes():
            return "weights differ"
        if cdf.tobytes() != cumulative_fractions(ours).tobytes():
            return "cumulative weights (CDF at every item) differ"
    return None


# --- the run -------------------------------------------------------------------------------------------


@dataclasses.dataclass
class Report:
    cases: int = 0
    accepted: int = 0
    rejected: int = 0
    accepted_by_type: dict = dataclasses.field(default_factory=dict)
    failures: list = dataclasses.field(default_factory=list)  # the parser raised something else
    crashes: list = dataclasses.field(default_factory=list)  # the native decoder died on an accepted case
    mismatches: list = dataclasses.field(default_factory=list)
    probed: int = 0
    probe_outcomes: dict = dataclasses.field(default_factory=dict)
    stricter: dict = dataclasses.field(default_factory=dict)  # our reasons where the native decoder accepted
    seeds: int = 0
    max_levels: int = 0
    restarts: int = 0
    seconds: float = 0.0

    @property
    def clean(self) -> bool:
        return not (self.failures or self.crashes or self.mismatches)

    def lines(self) -> list[str]:
        lines = [
            f"{self.cases} cases from {self.seeds} seed sketches (up to {self.max_levels} levels) in "
            f"{self.seconds:.1f} s: {self.accepted} accepted {self.accepted_by_type}, "
            f"{self.rejected} rejected (UncomputableInput)",
            f"parser failures (other exceptions): {len(self.failures)}; native decoder on accepted cases: "
            f"{len(self.crashes)} crashes, {len(self.mismatches)} mismatches; child restarts {self.restarts}",
        ]
        if self.probed:
            lines.append(f"rejected cases probed with the native decoder: {self.probed}, "
                         f"outcomes {self.probe_outcomes}")
            for reason, count in sorted(self.stricter.items(), key=lambda item: -item[1]):
                lines.append(f"  rejected by the parser, accepted by the native decoder ({count}): {reason}")
        found = (("FAILURE", self.failures), ("CRASH", self.crashes), ("MISMATCH", self.mismatches))
        for title, entries in found:
            for entry in entries[:20]:
                lines.append(f"{title}: {entry}")
        return lines


def run(cases: int, seed: int, workers: int = 2, probe_rejected: float = 0.0, max_exponent: int = 22,
        chunk: int = 2000) -> Report:
    started = time.perf_counter()
    seeds = seed_sketches(seed, max_exponent)
    report = Report(seeds=len(seeds), max_levels=max(_levels(s.blob) for s in seeds))
    probe_rng = np.random.default_rng([seed, 2])
    native = NativeWorkers(workers)
    try:
        for first in range(0, cases, chunk):
            accepted: dict[int, tuple[str, bytes, KllSketchContents]] = {}
            probes: dict[int, tuple[str, bytes]] = {}
            for index in range(first, min(first + chunk, cases)):
                label, blob = make_case(seed, index, seeds)
                report.cases += 1
                try:
                    with warnings.catch_warnings():
                        warnings.simplefilter("error")  # as the service's tests and fuzz server run
                        contents = read_kll_sketch(blob)
                except UncomputableInput as rejection:
                    report.rejected += 1
                    if probe_rejected and probe_rng.random() < probe_rejected:
                        probes[index] = (label, blob, rejection.locations[0].message)
                    continue
                except Exception:  # noqa: BLE001 - exactly what this harness looks for
                    report.failures.append(f"case {index} [{label}] {blob.hex()}\n{traceback.format_exc()}")
                    continue
                report.accepted += 1
                name = contents.item_type or "empty"
                report.accepted_by_type[name] = report.accepted_by_type.get(name, 0) + 1
                accepted[index] = (label, blob, contents)
            answers = native.decode([(i, c.item_type, b) for i, (_, b, c) in accepted.items()])
            for index, (label, blob, contents) in accepted.items():
                problem = compare(contents, answers[index])
                if problem is not None:
                    entry = f"case {index} [{label}] {problem}: {blob.hex()}"
                    died = answers[index][0] in ("crashed", "hung")
                    (report.crashes if died else report.mismatches).append(entry)
            if probes:
                probe_cases = [(i, "double", b) for i, (_, b, _) in probes.items()]
                for index, answer in native.decode(probe_cases).items():
                    outcome = PROBE_OUTCOMES[answer[0] if isinstance(answer, tuple) else answer[0][0]]
                    report.probe_outcomes[outcome] = report.probe_outcomes.get(outcome, 0) + 1
                    report.probed += 1
                    if outcome == "accepted by the native decoder":
                        reason = re.sub(r"-?\d[\d.e+-]*|\[[^]]*\]", "#", probes[index][2])
                        report.stricter[reason] = report.stricter.get(reason, 0) + 1
    finally:
        report.restarts = native.restarts
        native.close()
    report.seconds = time.perf_counter() - started
    return report


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--cases", type=int, default=100_000)
    parser.add_argument("--seed", type=int, default=1)
    parser.add_argument("--workers", type=int, default=2, help="child processes running the native decoder")
    parser.add_argument("--probe-rejected", type=float, default=0.0,
                        help="fraction of rejected cases also given to the native decoder (doubles), "
                        "to count its crashes")
    arguments = parser.parse_args(argv)
    report = run(arguments.cases, arguments.seed, arguments.workers, arguments.probe_rejected)
    for line in report.lines():
        print(line)
    return 0 if report.clean else 1


if __name__ == "__main__":
    sys.exit(main())
