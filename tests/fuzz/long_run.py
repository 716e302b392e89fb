"""The long fuzz run: the schemathesis CLI against the real server (gunicorn, 2 workers, 127.0.0.1).

Usage (from the repository root; ``make fuzz`` runs it with the defaults):
    python -m tests.fuzz.long_run --seed 8 --max-examples 500 --max-seconds 300

Starts gunicorn exactly as tests/system does (deploy/gunicorn.conf.py, a free port, its own
temporary directories) and runs ``schemathesis run http://127.0.0.1:PORT/openapi.json`` twice
with the MessagePack hooks (SCHEMATHESIS_HOOKS=tests.fuzz.hooks, which also adds the check
that a problem names the field): once asking for JSON answers, once for MessagePack (which can
carry a NaN that JSON would silently write as null). Every check runs except
positive_data_acceptance, for the reason given in tests/fuzz/test_schema_fuzz.py (rules about
values together, and the content of base64 strings, which the schema cannot express).

Each pass is bounded by --max-examples per operation (fuzzing phase; the coverage phase adds
its own) and by --max-seconds. The server runs with the limits of the in-process run
(TAILGAUGE_MAX_RESAMPLE_WORK=2000000, so generated interval requests stay quick) and, by
default, with numpy's RuntimeWarnings as errors (PYTHONWARNINGS), as the test suite runs the
core: an overflow or invalid operation the code did not guard becomes a 500 the run reports
(--production-warnings leaves them as warnings). At the end the server's log is read for
every unhandled error, grouped by the service function that raised it and labelled with
hooks.KNOWN_WARNINGS where it is a known bug. The server is stopped by its pid.

Reports (JUnit and NDJSON events per pass) and a summary go to --output-dir. The exit status
is 0 only when both passes found nothing.

One failure kind is expected and is not a bug: ST201 (negative_data_rejection) for an integer
just beyond +-1.7976931348623157e308, such as -1797693134862315700...0001 (309 digits).
schemathesis builds "just over the maximum" that way and JSON Schema compares the literal
exactly, while the service reads numbers as IEEE float64, which rounds it onto the largest
double, inside the bound. (In MessagePack such an integer cannot travel; hooks._representable
sends the float it rounds to.) The schema cannot say "after rounding to float64", and leaving
out negative_data_rejection would lose every other negative check, so such reports are read
by hand: the summary lists each failure with the body's constraint.
"""

from __future__ import annotations

import argparse
import collections
import json
import os
import re
import subprocess
import sys
import time
import xml.etree.ElementTree as ElementTree
from pathlib import Path

from tests.fuzz import hooks
from tests.system.server import REPO, GunicornServer

PASSES = (("json", "application/json"), ("msgpack", "application/msgpack"))
_SERVICE_FRAME = re.compile(r'File "(?P<file>[^"]*/service/[^"]*)", line \d+, in (?P<function>\w+)')


class FuzzedServer(GunicornServer):
    """The tests/system server with the in-process run's resampling budget and strict warnings."""

    def __init__(self, strict_warnings: bool) -> None:
        super().__init__(workers=2)
        self.strict_warnings = strict_warnings

    def environment(self) -> dict[str, str]:
        environ = super().environment()
        environ["TAILGAUGE_MAX_RESAMPLE_WORK"] = "2000000"
        if self.strict_warnings:
            environ["PYTHONWARNINGS"] = "error::RuntimeWarning"
        return environ


def count_cases(ndjson: Path) -> tuple[int, collections.Counter]:
    """(test cases sent, cases per operation) from a schemathesis NDJSON event file."""
    per_operation: collections.Counter = collections.Counter()
    for line in ndjson.read_text().splitlines():
        event = json.loads(line)
        finished = event.get("ScenarioFinished")
        if not finished:
            continue
        recorder = finished.get("recorder") or {}
        label = recorder.get("label") or "?"
        per_operation[label] += len(recorder.get("cases") or {})
    return sum(per_operation.values()), per_operation


_FAILURE_CODE = re.compile(r"^- (ST\d+ [^\n]+)", re.MULTILINE)
_DETAIL = re.compile(r"Invalid component: [^\n]+|NaN or infinity at [^\n]+|names no field[^\n]*|Schema at [^\n]+")


def junit_failures(junit: Path) -> list[str]:
    """One line per failing operation of a schemathesis JUnit report: its failure codes and details."""
    if not junit.exists() or not junit.stat().st_size:
        return []
    lines = []
    for case in ElementTree.parse(junit).iter("testcase"):
        for outcome in case:
            if outcome.tag in ("failure", "error"):
                text = outcome.text or outcome.get("message") or ""
                codes = "; ".join(dict.fromkeys(_FAILURE_CODE.findall(text)))
                details = "; ".join(dict.fromkeys(m.group(0) for m in _DETAIL.finditer(text)))
                lines.append(f"{case.get('name')}: {codes}" + (f" ({details})" if details else ""))
    return lines


def server_errors(log: str) -> collections.Counter:
    """Unhandled errors in the server's JSON log, by (file, function) of the innermost service frame."""
    found: collections.Counter = collections.Counter()
    for line in log.splitlines():
        try:
            record = json.loads(line)
        except ValueError:
            continue
        if not isinstance(record, dict) or not str(record.get("message", "")).startswith("unhandled error"):
            continue
        trace = record.get("exception")
        if not trace:
            continue
        frames = list(_SERVICE_FRAME.finditer(trace))
        site = (Path(frames[-1]["file"]).name, frames[-1]["function"]) if frames else ("?", "?")
        found[(site, trace.strip().splitlines()[-1])] += 1
    return found


def run_pass(name: str, accept: str, base_url: str, args, out: Path) -> tuple[int, int, collections.Counter]:
    ndjson = out / f"{name}.ndjson"
    command = [
        str(Path(sys.executable).with_name("schemathesis")),
        "run",
        f"{base_url}/openapi.json",
        "--seed", str(args.seed),
        "--max-examples", str(args.max_examples),
        "--max-time", str(args.max_seconds),
        "--checks", "all",
        "--exclude-checks", "positive_data_acceptance",
        "--header", f"Accept: {accept}",
        "--workers", "2",
        "--generation-database", "none",
        "--suppress-health-check", "all",
        "--request-timeout", "60",
        "--report", "junit,ndjson",
        "--report-junit-path", str(out / f"{name}.junit.xml"),
        "--report-ndjson-path", str(ndjson),
        "--no-color",
    ]
    environ = dict(os.environ, SCHEMATHESIS_HOOKS="tests.fuzz.hooks", PYTHONPATH=str(REPO))
    print(f"\n=== pass {name} (Accept: {accept}) ===\n{' '.join(command)}", flush=True)
    started = time.monotonic()
    # schemathesis writes .hypothesis/ and .schemathesis/ into its working directory (ignored by git).
    completed = subprocess.run(command, cwd=REPO, env=environ, check=False)
    elapsed = time.monotonic() - started
    cases, per_operation = count_cases(ndjson) if ndjson.exists() else (0, collections.Counter())
    print(f"pass {name}: exit {completed.returncode}, {cases} cases in {elapsed:.0f} s", flush=True)
    return completed.returncode, cases, per_operation


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--seed", type=int, default=8)
    parser.add_argument("--max-examples", type=int, default=500, help="per operation and pass (fuzzing phase)")
    parser.add_argument("--max-seconds", type=int, default=300, help="time budget of each pass")
    parser.add_argument("--output-dir", type=Path, default=REPO / "test-artifacts" / "fuzz")
    parser.add_argument("--production-warnings", action="store_true", help="leave RuntimeWarnings as warnings")
    args = parser.parse_args(argv)
    out = args.output_dir
    out.mkdir(parents=True, exist_ok=True)

    results = {}
    with FuzzedServer(strict_warnings=not args.production_warnings) as server:
        print(f"gunicorn pid {server.pid}, workers {sorted(server.worker_pids())}, {server.base_url}", flush=True)
        for name, accept in PASSES:
            results[name] = run_pass(name, accept, server.base_url, args, out)
        alive = server.ready()
        log = server.log()
    errors = server_errors(log)

    lines = [f"seed {args.seed}, max examples {args.max_examples}, max {args.max_seconds} s per pass"]
    for name, (code, cases, per_operation) in results.items():
        lines.append(f"pass {name}: exit {code}, {cases} cases")
        lines += [f"  {label}: {n}" for label, n in sorted(per_operation.items())]
        lines += [f"  failure: {line}" for line in junit_failures(out / f"{name}.junit.xml")]
    lines.append(f"total cases: {sum(cases for _, cases, _ in results.values())}")
    lines.append(f"server still ready at the end: {alive}")
    lines.append(f"unhandled errors in the server log: {sum(errors.values())}")
    for (site, last_line), n in sorted(errors.items()):
        label = hooks.KNOWN_WARNINGS.get(site, "NEW")
        lines.append(f"  {n} x {site[0]}:{site[1]} ({last_line}) - known bug {label}" if label != "NEW"
                     else f"  {n} x {site[0]}:{site[1]} ({last_line}) - NOT A KNOWN BUG")
    summary = "\n".join(lines)
    print("\n" + summary)
    (out / "summary.txt").write_text(summary + "\n")
    return 0 if alive and all(code == 0 for code, _, _ in results.values()) else 1


if __name__ == "__main__":
    sys.exit(main())
