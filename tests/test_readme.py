"""The README's examples are run as written, and the numbers it quotes are the numbers served."""

import json
import pathlib
import re

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
    """Each example's answer, keyed by path; a second example of a path gets the suffix '#2'."""
    examples = _examples()
    assert {path for path, _ in examples} == {
        "/v1/descriptors/samples",
        "/v1/descriptors/table",
        "/v1/descriptors/bins",
        "/v1/comparisons",
        "/v1/descriptors/merge",
        "/v1/descriptors/groups",
    }
    found = {}
    with TestClient(create_app(Settings())) as client:
        for path, body in examples:
            key = path if path not in found else f"{path}#2"
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


@pytest.mark.parametrize("marker", ["chunk_summaries", "msgspec.msgpack.encode", 'json={"values": weights'])
def test_python_examples_run_as_written(marker, capsys):
    """Each Python example runs against the app in process (sizes shrunk for test time)."""
    blocks = [m["code"] for m in PYTHON_BLOCK.finditer(README) if marker in m["code"]]
    assert len(blocks) == 1, marker
    code = (
        blocks[0]
        .replace("import httpx\n", "")
        .replace("import httpx, ", "import ")
        .replace('httpx.post(\n    "http://127.0.0.1:8000', 'client.post(\n    "')
        .replace('httpx.post("http://127.0.0.1:8000', 'client.post("')
        .replace("size=10_000_000, chunks=500_000", "size=200_000, chunks=20_000")
        .replace("size=1_000_000)", "size=20_000)")
    )
    assert "client.post(" in code and "127.0.0.1" not in code
    with TestClient(create_app(Settings(request_log=False))) as client:
        exec(compile(code, f"README:{marker}", "exec"), {"client": client})
    printed = capsys.readouterr().out
    assert printed.strip() and "None" not in printed.split()[0]


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
