"""The README's examples are run as written, and the numbers it quotes are the numbers served."""

import json
import pathlib
import re

import httpx
import pytest
from litestar.testing import TestClient

from tailgauge.api import create_app
from tailgauge.settings import Settings

README = (pathlib.Path(__file__).resolve().parents[1] / "README.md").read_text()
CURL = re.compile(r"curl -s http://127\.0\.0\.1:8000(?P<path>/\S+).*?-d '(?P<body>.*?)'", re.DOTALL)


def _examples() -> list[tuple[str, dict]]:
    return [(match["path"], json.loads(match["body"])) for match in CURL.finditer(README)]


@pytest.fixture(scope="module")
def answers():
    """Each example's answer, keyed by path; a later example of a path gets the suffix '#2', '#3', ..."""
    examples = _examples()
    assert {path for path, _ in examples} == {
        "/v1/descriptors/samples",
        "/v1/descriptors/table",
        "/v1/descriptors/bins",
        "/v1/descriptors/histogram",
        "/v1/comparisons",
        "/v1/descriptors/merge",
        "/v1/descriptors/groups",
    }
    found = {}
    with TestClient(create_app(Settings())) as client:
        for path, body in examples:
            seen = sum(1 for earlier in found if earlier.split("#")[0] == path)
            key = path if not seen else f"{path}#{seen + 1}"
            response = client.post(path, json=body)
            assert response.status_code == 200, response.text
            found[key] = response.json()
    return found


def test_interval_example_quotes_served_numbers(answers):
    result = answers["/v1/descriptors/samples#2"]
    mean = result["descriptors"]["mean"]
    assert round(mean["value"], 2) == 250.43
    assert mean["interval"]["method"] == "bca" and mean["interval"]["low"] < mean["value"] < mean["interval"]["high"]
    assert mean["classical_interval"]["method"] == "student_t"
    assert result["resampling"]["seed"] == 12345


def test_the_two_commands_are_the_makefile_targets():
    assert "make serve" in README and "make test" in README
    makefile = (pathlib.Path(__file__).resolve().parents[1] / "Makefile").read_text()
    assert re.search(r"^serve:", makefile, re.M) and re.search(r"^test:", makefile, re.M)
    ci = (pathlib.Path(__file__).resolve().parents[1] / ".ci" / "run").read_text()
    assert "make test" in ci


def test_bag_weight_example_quotes_served_numbers(answers):
    result = answers["/v1/descriptors/samples"]
    d = result["descriptors"]
    for quoted in (d["mean"]["value"], d["standard_deviation"]["value"], d["skewness"]["value"]):
        assert repr(quoted) in README
    assert result["size"] == {**result["size"], "n": 11, "omitted": 1}
    assert [q["value"] for q in result["quantiles"]] == [249.2, 250.3, 252.05]
    assert result["modes"]["values"] == [250.3]
    assert result["warnings"][0]["code"] == "missing_values_omitted"


def test_loss_table_example_quotes_served_numbers(answers):
    result = answers["/v1/descriptors/table"]
    assert result["descriptors"]["mean"]["value"] == pytest.approx(2100.0, rel=1e-12)
    assert round(result["descriptors"]["skewness"]["value"], 2) == 5.08
    top = result["tail_contributions"]["outcomes"][-1]
    assert top["value"] == 40000.0
    assert round(top["third"], 2) == 5.09 and round(top["fourth"], 2) == 28.15
    assert round(result["tail_contributions"]["standardized_fourth"], 2) == 28.16


def test_delivery_histogram_example_quotes_served_numbers(answers):
    result = answers["/v1/descriptors/bins"]
    assert result["descriptors"]["mean"]["value"] is None
    assert "open_bin_holds_data" in {w["code"] for w in result["warnings"]}
    assert result["descriptors"]["median"]["value"] == pytest.approx(30.0, abs=1e-12)
    assert round(result["modes"]["values"][0], 2) == 25.95
    assert result["grouping"]["bin_width"] is None
    assert result["grouping"]["modal_classes"][0]["lower"] == 15.0


def test_comparison_example_quotes_served_numbers(answers):
    result = answers["/v1/comparisons"]
    for quoted in (
        result["differences"]["mean"]["value"],
        result["ratios"]["standard_deviation"]["value"],
        result["standardized_mean_difference"]["value"],
    ):
        assert repr(quoted) in README
    assert [s["value"] for s in result["quantile_shifts"]][0] == -6.0
    assert result["distribution_test"]["statistic"] == 0.5
    assert round(result["distribution_test"]["p_value"], 4) == 0.0995
    assert result["differences"]["mean"]["interval"]["low"] < 0 < result["differences"]["mean"]["interval"]["high"]
    ratio = result["ratios"]["standard_deviation"]["interval"]
    assert ratio["low"] < 1 < ratio["high"]  # as the README says: "no change" is still inside


def test_merge_example_quotes_served_numbers(answers):
    state = answers["/v1/descriptors/merge"]["partial_state"]
    assert repr(state["mean"]) in README
    for quoted in state["central_sums"]:
        assert repr(quoted) in README


def test_score_example_quotes_served_numbers():
    values = [34, 41, 38, 45, 52, 39, 36, 48, 61, 40, 37, 44]
    with TestClient(create_app(Settings(request_log=False))) as client:
        body = client.post("/v1/descriptors/samples", json={"values": values, "options": {"score": [47, 75]}}).json()
    late = body["scores"]["points"][1]
    assert round(late["z"], 2) == 4.16 and round(late["robust_z"], 2) == 5.82


PYTHON_BLOCK = re.compile(r"```python\n(?P<code>.*?)```", re.DOTALL)


@pytest.mark.parametrize("marker", ["msgspec.msgpack.encode", '"first": old, "second": new'])
def test_python_examples_run_as_written(marker, capsys):
    """Each raw-HTTP Python example runs against the app in process (sizes shrunk for test time)."""
    blocks = [m["code"] for m in PYTHON_BLOCK.finditer(README) if marker in m["code"]]
    assert len(blocks) == 1, marker
    code = (
        blocks[0]
        .replace("import httpx\n", "")
        .replace("import httpx, ", "import ")
        .replace('httpx.post(\n    "http://127.0.0.1:8000', 'client.post(\n    "')
        .replace('httpx.post("http://127.0.0.1:8000', 'client.post("')
        .replace("size=1_000_000)", "size=20_000)")
    )
    assert "client.post(" in code and "127.0.0.1" not in code
    with TestClient(create_app(Settings(request_log=False))) as client:
        exec(compile(code, f"README:{marker}", "exec"), {"client": client})
    printed = capsys.readouterr().out
    assert printed.strip() and "None" not in printed.split()[0]


CLIENT_URL = 'Client("http://127.0.0.1:8000"'


@pytest.mark.parametrize("marker", ["client.describe_samples(values=weights", "describe_chunks(client", "AsyncClient("])
def test_client_examples_run_as_written(marker, capsys):
    """Each example of tailgauge.client runs as written, its client sending through the app in process."""
    blocks = [m["code"] for m in PYTHON_BLOCK.finditer(README) if marker in m["code"]]
    assert len(blocks) == 1, marker
    code = (
        blocks[0]
        .replace("size=10_000_000, chunks=500_000", "size=200_000, chunks=20_000")
        .replace("size=100_000)", "size=20_000)")
        .replace("bags[:50_000]", "bags[:10_000]").replace("bags[50_000:]", "bags[10_000:]")
    )
    asynchronous = "AsyncClient(" in code
    url = 'AsyncClient("http://127.0.0.1:8000"' if asynchronous else CLIENT_URL
    assert url in code
    code = code.replace(url, url.replace("http://127.0.0.1:8000", "http://testserver.local") + ", http_client=_in_process")
    assert "127.0.0.1" not in code
    app = create_app(Settings(request_log=False))
    if asynchronous:
        transport = httpx.ASGITransport(app=app)
        namespace = {"_in_process": httpx.AsyncClient(transport=transport, base_url="http://testserver.local")}
        with TestClient(app):  # runs the app's startup and shutdown around the example
            exec(compile(code, f"README:{marker}", "exec"), namespace)
    else:
        with TestClient(app) as in_process:
            exec(compile(code, f"README:{marker}", "exec"), {"_in_process": in_process})
    printed = capsys.readouterr().out.split("\n")
    assert printed[0].strip() and "None" not in printed[0].split()
    if marker.startswith("client.describe_samples"):
        # The problem: the string at $.values[3] (line 2), after the mean and estimator (line 1).
        assert any(line.startswith("400 ") and "$.values[3]" in line for line in printed)


def test_checkout_histogram_example_quotes_served_numbers(answers):
    result = answers["/v1/descriptors/histogram"]
    assert result["kind"] == "histogram"
    assert result["descriptors"]["mean"]["value"] == 1298.4 / 14220 and round(1298.4 / 14220, 4) == 0.0913
    assert [round(q["value"], 3) for q in result["quantiles"]][2] == 0.383
    assert result["grouping"]["known_summary"] == {
        "count": 14220.0, "sum": 1298.4, "minimum": None, "maximum": None, "exact": ["mean"]}
    assert result["descriptors"]["mean"]["estimator"].startswith("sum / count: exact, from the histogram's sum")
    assert "open_bin_holds_data" in {w["code"] for w in result["warnings"]}
    assert result["descriptors"]["variance"]["value"] is None


def test_histogram_comparison_example_quotes_served_numbers():
    block = next(m["code"] for m in PYTHON_BLOCK.finditer(README) if '"first": old, "second": new' in m["code"])
    code = block.replace("import httpx\n", "").replace('httpx.post("http://127.0.0.1:8000', 'client.post("')
    scope: dict = {}
    with TestClient(create_app(Settings(request_log=False))) as client:
        scope["client"] = client
        exec(compile(code.replace("print(", "(lambda *a: None)("), "README:histograms", "exec"), scope)
    body = scope["body"]
    shifts = {s["probability"]: s for s in body["quantile_shifts"]}
    ms = lambda x: round(x * 1000, 1)  # noqa: E731
    assert (ms(shifts[0.5]["value"]), ms(shifts[0.5]["interval"]["low"]), ms(shifts[0.5]["interval"]["high"])) == (
        -10.7, -12.1, -9.3)
    assert (round(shifts[0.99]["value"] * 1000), round(shifts[0.99]["interval"]["low"] * 1000),
            round(shifts[0.99]["interval"]["high"] * 1000)) == (-64, -99, -25)
    new_99 = body["second"]["quantiles"][2]
    assert (round(new_99["value"], 3), round(new_99["interval"]["low"], 3), round(new_99["interval"]["high"], 3)) == (
        0.318, 0.296, 0.338)
    assert ms(body["differences"]["mean"]["value"]) == -18.0 and body["differences"]["mean"]["interval"] is None
    assert body["distribution_test"]["cell_edges"] == [0.5]
    assert round(body["distribution_test"]["p_value"], 4) == 0.0002
    assert {"bins_coarsened", "interval_not_offered"} <= {w["code"] for w in body["warnings"]}


def test_fill_head_example_quotes_served_numbers(answers):
    groups = {g["key"]: g for g in answers["/v1/descriptors/groups"]["groups"]}
    assert list(groups) == ["head-1", "head-2", "head-3"]
    assert groups["head-1"]["descriptors"]["mean"]["value"] == 500.61
    assert groups["head-1"]["resampling"]["seed"] == 7155830076583600
    head2 = groups["head-2"]["contrasts"]
    assert round(head2["differences"]["mean"]["value"], 2) == 1.49
    interval = head2["differences"]["mean"]["interval"]
    assert (round(interval["low"], 2), round(interval["high"], 2)) == (1.16, 1.81)
    assert round(head2["ratios"]["standard_deviation"]["value"], 3) == 0.947
    assert round(head2["standardized_mean_difference"]["value"], 2) == 3.65
    ratio = groups["head-3"]["contrasts"]["ratios"]["standard_deviation"]
    assert round(ratio["value"], 2) == 3.36
    assert (round(ratio["interval"]["low"], 2), round(ratio["interval"]["high"], 2)) == (2.03, 6.36)
