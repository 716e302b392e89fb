"""Figures and plot data over HTTP: negotiation, what the document declares, located problems, and
markers that sit at the JSON answer's values (read back from the SVG alone, through its ticks).
"""

from __future__ import annotations

import io
import json

import numpy as np
import pytest
from litestar.testing import TestClient
from PIL import Image

from tailgauge.api import create_app
from tailgauge.api.operations import OPERATIONS
from tailgauge.settings import Settings
from tests.figures.svg_reading import by_id, marker_points, parse, path_points, x_scale

SAMPLES, TABLE, BINS = "/v1/descriptors/samples", "/v1/descriptors/table", "/v1/descriptors/bins"
MERGE, COMPARISONS = "/v1/descriptors/merge", "/v1/comparisons"
HISTOGRAM = "/v1/descriptors/histogram"
SVG, PNG = "image/svg+xml", "image/png"
# Kestrel Hill Roastery's bag weights (README), with a few more bags.
BAGS = [251.2, 249.8, 250.4, 252.9, 250.1, 249.5, 250.7, 251.0, 248.9, 250.3, 250.3, 249.9,
        250.6, 251.4, 250.0, 249.7, 250.8, 250.2, 251.9, 249.6, 250.5, 250.4, 249.4, 250.9]
BODIES = {
    SAMPLES: {"values": BAGS},
    TABLE: {"outcomes": [{"value": 0, "weight": 412}, {"value": 1, "weight": 187}, {"value": 2, "weight": 61}],
            "weight_kind": "counts"},
    BINS: {"edges": [0, 15, 30, 45, 60, None], "counts": [18, 64, 41, 12, 5]},
    # A histogram is drawn as the bins it becomes (the same counts as BINS, cumulated).
    HISTOGRAM: {"layout": "cumulative", "lower_bound": 0, "upper_bounds": [15, 30, 45, 60, None],
                "cumulative_counts": [18, 82, 123, 135, 140]},
    COMPARISONS: {"first": {"kind": "samples", "values": BAGS[:12]}, "second": {"kind": "bins", "edges": [248, 250, 252, 254],
                                                                              "counts": [4, 7, 1]}},
}


@pytest.fixture(scope="module")
def client():
    with TestClient(create_app(Settings(request_log=False))) as test_client:
        yield test_client


@pytest.mark.parametrize("path", list(BODIES))
@pytest.mark.parametrize("media", [SVG, PNG])
def test_every_descriptor_and_comparison_operation_answers_a_figure(client, path, media):
    answer = client.post(path, json=BODIES[path], headers={"accept": media})
    assert answer.status_code == 200, answer.text
    assert answer.headers["content-type"].startswith(media)
    if media == PNG:
        assert answer.content[:8] == b"\x89PNG\r\n\x1a\n"
        assert Image.open(io.BytesIO(answer.content)).size == (800, 600)
    else:
        root = parse(answer.content)
        first_axes = "distribution-functions" if path == COMPARISONS else "distribution"
        assert by_id(root, first_axes) is not None


def test_negotiation_prefers_json_for_any_and_svg_for_any_image(client):
    assert client.post(SAMPLES, json=BODIES[SAMPLES], headers={"accept": "*/*"}).headers["content-type"].startswith(
        "application/json")
    assert client.post(SAMPLES, json=BODIES[SAMPLES], headers={"accept": "image/*"}).headers["content-type"].startswith(SVG)
    both = client.post(SAMPLES, json=BODIES[SAMPLES], headers={"accept": "image/svg+xml;q=0.5, image/png"})
    assert both.headers["content-type"].startswith(PNG)


def test_merge_draws_nothing_and_says_what_it_answers(client):
    body = {"states": [{"count": 4, "mean": 2.5, "central_sums": [5.0, 0.0, 10.25], "minimum": 1, "maximum": 4}]}
    refused = client.post(MERGE, json=body, headers={"accept": SVG})
    assert refused.status_code == 406
    assert refused.json()["errors"][0]["path"] == "header.accept"
    refused = client.post(SAMPLES, json=BODIES[SAMPLES], headers={"accept": "text/html"})
    assert refused.status_code == 406 and "image/svg+xml" in refused.json()["detail"]
    assert client.post(MERGE, json=body).json()["plot_data"] is None


def test_the_document_declares_the_figure_types_per_operation(client):
    document = client.get("/openapi.json").json()
    for op in OPERATIONS:
        if op.method != "post":
            continue
        content = document["paths"][op.path]["post"]["responses"]["200"]["content"]
        if op.path in (MERGE, "/v1/descriptors/groups"):  # no values to draw; no layout for many inputs yet
            assert SVG not in content and PNG not in content
            continue
        assert content[SVG]["schema"] == {"type": "string", "contentMediaType": SVG}
        assert content[PNG]["schema"] == {"type": "string", "contentMediaType": PNG}


@pytest.mark.parametrize(
    ("figure", "path"),
    [
        ({"width": 100}, "$.options.figure.width"),
        ({"height": 5000}, "$.options.figure.height"),
        ({"title": "bags\nweights"}, "$.options.figure.title"),
        ({"unit": "g" * 41}, "$.options.figure.unit"),
        ({"colour": "red"}, "$.options.figure"),
    ],
)
def test_bad_figure_options_are_located_problems(client, figure, path):
    body = {"values": BAGS, "options": {"figure": figure}}
    for accept in (SVG, "application/json"):
        answer = client.post(SAMPLES, json=body, headers={"accept": accept})
        assert answer.status_code == 400, answer.text
        assert answer.headers["content-type"].startswith("application/problem+json")
        assert answer.json()["errors"][0]["path"].startswith(path), answer.json()


def test_plot_data_is_null_unless_asked_and_matches_the_input(client):
    plain = client.post(SAMPLES, json=BODIES[SAMPLES]).json()
    assert plain["plot_data"] is None
    asked = client.post(SAMPLES, json={"values": BAGS, "options": {"plot_data": True}}).json()["plot_data"]
    assert asked["histogram"]["rule"] == "one_bin_per_outcome"  # 22 distinct bag weights
    assert sum(asked["histogram"]["counts"]) == len(BAGS)
    assert asked["distribution_function"]["values"] == sorted(set(BAGS)) and asked["distribution_function"]["exact"]
    compared = client.post(COMPARISONS, json={**BODIES[COMPARISONS], "options": {"plot_data": True}}).json()
    assert compared["first"]["plot_data"]["weights"] == "count"
    assert compared["second"]["plot_data"]["histogram"]["edges"] == [248.0, 250.0, 252.0, 254.0]
    assert compared["second"]["plot_data"]["distribution_function"]["grouped"] is True


def test_markers_sit_at_the_json_answers_values(client):
    """The same body answered as JSON and as SVG: the SVG's markers, mapped back to data through
    its own tick labels, are the JSON answer's mean, median, quartiles, quantiles and intervals."""
    values = np.round(np.random.default_rng(21).normal(250.0, 1.2, 80), 1).tolist()
    options = {"probabilities": [0.1, 0.25, 0.5, 0.75, 0.9],
               "interval": {"method": "percentile", "resamples": 400, "seed": 3}, "figure": {"unit": "g"}}
    body = json.dumps({"values": values, "options": options})
    headers = {"content-type": "application/json"}
    answer = client.post(SAMPLES, content=body, headers={**headers, "accept": "application/json"}).json()
    svg = client.post(SAMPLES, content=body, headers={**headers, "accept": SVG})
    root = parse(svg.content)
    slope, intercept = x_scale(root, "contributions")  # the panels share their x axis

    def data_x(svg_x: float) -> float:
        return (svg_x - intercept) / slope

    tolerance = 2e-3 / abs(slope) + 1e-9 * 250  # the SVG's coordinates carry 6 significant digits
    descriptors = answer["descriptors"]
    for name in ("mean", "median"):
        xs = {data_x(x) for x, _ in path_points(by_id(root, name))}
        assert max(abs(x - descriptors[name]["value"]) for x in xs) < tolerance, name
        whisker = sorted(data_x(x) for x, _ in path_points(by_id(root, f"interval-{name}")))
        assert whisker[0] == pytest.approx(descriptors[name]["interval"]["low"], abs=tolerance)
        assert whisker[-1] == pytest.approx(descriptors[name]["interval"]["high"], abs=tolerance)
    quantiles = [q["value"] for q in answer["quantiles"]]
    marked = [data_x(x) for x, _ in marker_points(by_id(root, "quantiles"))]
    assert marked == pytest.approx(quantiles, abs=tolerance)
    lower = [data_x(x) for x, _ in path_points(by_id(root, "quartile-lower"))]
    assert lower[0] == pytest.approx(answer["quantiles"][1]["value"], abs=tolerance)
    sd = descriptors["standard_deviation"]["value"]
    band = [data_x(x) for x, _ in path_points(by_id(root, "sd-band"))]
    assert min(band) == pytest.approx(descriptors["mean"]["value"] - sd, abs=tolerance)
    contributors = [data_x(x) for x, _ in marker_points(by_id(root, "third"))]
    listed = [o["value"] for o in answer["tail_contributions"]["outcomes"]]
    assert contributors == pytest.approx(listed, abs=tolerance)


def test_a_figure_reads_what_options_descriptors_leaves_out(client):
    body = {"values": BAGS, "options": {"descriptors": ["variance"], "probabilities": [0.5]}}
    shown = client.post(SAMPLES, json=body).json()
    assert "mean" not in shown["descriptors"] and "tail_contributions" not in shown
    root = parse(client.post(SAMPLES, json=body, headers={"accept": SVG}).content)
    for gid in ("mean", "median", "quartile-lower", "sd-band", "third"):
        assert by_id(root, gid) is not None, gid


LARGEST = 1.7976931348623157e308


@pytest.mark.parametrize(
    ("path", "body"),
    [
        (SAMPLES, {"values": [-LARGEST, 0.0, LARGEST, 1.0, 2.0, 3.0] * 10}),
        (SAMPLES, {"values": [-LARGEST, LARGEST]}),
        (SAMPLES, {"values": [LARGEST]}),
        (SAMPLES, {"values": [1e-320, 2e-320, 3e-320] * 20 + [float(i) * 1e-321 for i in range(40)]}),
        (SAMPLES, {"values": [5.0] * 50}),
        (TABLE, {"outcomes": [{"value": -LARGEST, "weight": 1}, {"value": LARGEST, "weight": 1}], "weight_kind": "counts"}),
        (COMPARISONS, {"first": {"kind": "samples", "values": [-LARGEST, LARGEST]},
                       "second": {"kind": "samples", "values": [1.0, 2.0, 3.0]}}),
    ],
)
def test_extreme_values_draw_and_their_plot_data_stay_finite(client, path, body):
    """Values near float64's largest (spans that overflow) or subnormal ones: drawn in units of a power
    of ten, never a 500; plot_data holds only finite numbers (no null a NaN would have become)."""
    for media in (SVG, PNG):
        answer = client.post(path, json=body, headers={"accept": media})
        assert answer.status_code == 200, answer.text
    found = client.post(path, json={**body, "options": {"plot_data": True}}).json()
    plots = [found["plot_data"]] if path != COMPARISONS else [found["first"]["plot_data"], found["second"]["plot_data"]]
    for plot in plots:
        numbers = [*plot["histogram"]["edges"], *plot["histogram"]["counts"],
                   *plot["distribution_function"]["values"], *plot["distribution_function"]["probabilities"]]
        assert all(isinstance(x, float | int) for x in numbers), plot
        assert plot["histogram"]["edges"] == sorted(plot["histogram"]["edges"])


def test_a_histogram_is_drawn_and_plotted_as_the_bins_it_became(client):
    """Same counts sent as a cumulative histogram and as bins: the same plot data, the same SVG (byte for
    byte: the same request draws the same bytes)."""
    plotted = {}
    for path in (BINS, HISTOGRAM):
        body = {**BODIES[path], "options": {"plot_data": True}}
        answer = client.post(path, json=body)
        assert answer.status_code == 200, answer.text
        plotted[path] = answer.json()["plot_data"]
    assert plotted[HISTOGRAM] == plotted[BINS] and plotted[BINS]["histogram"]["counts"] == [18, 64, 41, 12, 5]
    figures = [client.post(path, json=BODIES[path], headers={"accept": SVG}).content for path in (BINS, HISTOGRAM)]
    assert figures[0] == figures[1]


def test_an_svg_is_compressed_when_accepted_and_a_png_is_not(client):
    """A PNG is compressed already (gzip would only cost CPU); an SVG is text and shrinks as JSON does."""
    headers = {"accept-encoding": "gzip"}
    svg = client.post(SAMPLES, json=BODIES[SAMPLES], headers={**headers, "accept": SVG})
    png = client.post(SAMPLES, json=BODIES[SAMPLES], headers={**headers, "accept": PNG})
    assert svg.status_code == png.status_code == 200
    assert svg.headers.get("content-encoding") == "gzip" and parse(svg.content) is not None  # inflated by httpx
    assert "content-encoding" not in png.headers and png.content[:8] == b"\x89PNG\r\n\x1a\n"
