"""POST /v1/descriptors/histogram and histograms as comparison inputs, over HTTP.

The cumulative layout is checked against the bins endpoint on the same data (OpenMetrics: bucket
le=u_i holds c_i - c_(i-1) observations); every rule a request can break is a problem naming the
field by JSON path.
"""

from __future__ import annotations

import pytest

HISTOGRAM = "/v1/descriptors/histogram"
BINS = "/v1/descriptors/bins"
COMPARISONS = "/v1/comparisons"

SCRAPE = {
    "layout": "cumulative",
    "upper_bounds": [0.05, 0.1, 0.2, 0.3, 0.5, 1.0, None],
    "cumulative_counts": [310, 905, 1320, 1388, 1405, 1411, 1412],
    "lower_bound": 0.0,
    "count": 1412,
}


def _post(client, path, body):
    response = client.post(path, json=body)
    return response.status_code, response.json()


@pytest.mark.parametrize("options", [{}, {"probabilities": [0.5, 0.99], "interval": {"resamples": 300, "seed": 4}}])
def test_a_cumulative_histogram_answers_what_the_bins_endpoint_does(make_client, options):
    client = make_client(request_log=False)
    status, histogram = _post(client, HISTOGRAM, {**SCRAPE, "options": options})
    assert status == 200, histogram
    counts = [b - a for a, b in zip([0, *SCRAPE["cumulative_counts"]], SCRAPE["cumulative_counts"])]
    edges = [0.0, *SCRAPE["upper_bounds"]]
    status, bins = _post(client, BINS, {"edges": edges, "counts": counts, "options": options})
    assert status == 200, bins
    assert histogram.pop("kind") == "histogram" and bins.pop("kind") == "bins"
    summary = histogram["grouping"].pop("known_summary")
    assert summary == {"count": 1412.0, "sum": None, "minimum": None, "maximum": None, "exact": []}
    assert bins["grouping"].pop("known_summary") is None
    assert histogram == bins


def test_an_exponential_histogram_with_sum_min_and_max_says_what_they_made_exact(client):
    # scale 2: boundaries 2^(k/4), k = 3..10, from 1.68 to 5.66; min and max close the outer buckets.
    body = {"layout": "exponential", "scale": 2, "zero_count": 0, "sum": 33.0, "min": 1.8, "max": 5.5,
            "positive": {"offset": 3, "bucket_counts": [2, 4, 3, 1, 0, 1, 1]}}
    status, answer = _post(client, HISTOGRAM, body)
    assert status == 200, answer
    assert answer["descriptors"]["mean"]["value"] == 33.0 / 12
    assert answer["descriptors"]["minimum"]["value"] == 1.8 and answer["descriptors"]["maximum"]["value"] == 5.5
    assert answer["grouping"]["known_summary"]["exact"] == ["mean", "minimum", "maximum", "range"]
    assert answer["grouping"]["lowest_edge"] == 1.8 and answer["grouping"]["highest_edge"] == 5.5


@pytest.mark.parametrize(
    ("body", "status", "path"),
    [
        ({**SCRAPE, "cumulative_counts": [310, 905, 900, 1388, 1405, 1411, 1412]}, 422, "$.cumulative_counts[2]"),
        ({**SCRAPE, "upper_bounds": [0.05, 0.1, 0.1, 0.3, 0.5, 1.0, None]}, 422, "$.upper_bounds[2]"),
        ({**SCRAPE, "count": 1500}, 422, "$.count"),
        ({**SCRAPE, "sum": -1.0}, 422, "$.sum"),  # below 0, the least the buckets above lower_bound 0 allow
        ({**SCRAPE, "cumulative_counts": [310, 905]}, 422, "$.cumulative_counts"),
        ({**SCRAPE, "min": 0.01}, 400, "$.min"),
        ({"layout": "cumulative", "upper_bounds": [1.0]}, 400, "$.cumulative_counts"),
        ({"layout": "explicit", "explicit_bounds": [1, 2], "bucket_counts": [1, 2]}, 422, "$.bucket_counts"),
        ({"layout": "explicit", "explicit_bounds": [1, 2], "bucket_counts": [1, -2, 3]}, 400, "$.bucket_counts[1]"),
        ({"layout": "explicit", "explicit_bounds": [1, 2], "bucket_counts": [0, 2, 3], "min": 3, "max": 2.5}, 422,
         "$.min"),
        ({"layout": "explicit", "explicit_bounds": [1, 2], "bucket_counts": [0, 2, 3], "max": 1.5}, 422, "$.max"),
        ({"layout": "exponential", "scale": -11, "zero_count": 0}, 400, "$.scale"),
        ({"layout": "exponential", "scale": 21, "zero_count": 0}, 400, "$.scale"),
        ({"layout": "exponential", "scale": 0, "zero_count": 0, "positive": {"offset": 5000, "bucket_counts": [1]}},
         422, "$.positive.offset"),
        ({"layout": "exponential", "scale": -10, "zero_count": 0,
          "positive": {"offset": 0, "bucket_counts": [1, 1, 1]}}, 422, "$.positive.bucket_counts[1]"),
        ({"layout": "exponential", "scale": 0, "zero_count": 0,
          "positive": {"offset": 2**31, "bucket_counts": [1]}}, 400, "$.positive.offset"),
        ({"layout": "exponential", "scale": 0, "zero_count": 3, "zero_threshold": 4,
          "positive": {"offset": 0, "bucket_counts": [1]}}, 422, "$.zero_threshold"),
        ({"layout": "exponential", "zero_count": 0}, 400, "$.scale"),
        ({"layout": "histogram"}, 400, "$.layout"),
    ],
)
def test_every_histogram_rule_is_a_problem_naming_its_field(make_client, body, status, path):
    client = make_client(request_log=False)
    got, problem = _post(client, HISTOGRAM, body)
    assert got == status, problem
    assert path in [error["path"] for error in problem["errors"]], problem


def test_the_bucket_limit_is_the_value_limit(make_client):
    client = make_client(request_log=False, max_values=5)
    status, problem = _post(client, HISTOGRAM, SCRAPE)
    assert status == 413 and problem["errors"][0]["path"] == "$.cumulative_counts"
    exponential = {"layout": "exponential", "scale": 0, "zero_count": 1, "positive": {"offset": 0, "bucket_counts": [1]},
                   "negative": {"offset": 0, "bucket_counts": [1, 2, 3, 4]}}
    status, problem = _post(client, HISTOGRAM, exponential)  # 1 + 1 + 4 buckets: the zero bucket counts too
    assert status == 413 and problem["errors"][0]["path"] == "$.negative.bucket_counts"


def test_a_histogram_is_a_comparison_input_and_its_errors_are_placed_under_its_side(make_client):
    client = make_client(request_log=False)
    other = {"kind": "bins", "edges": [0.0, 0.1, 0.3, 1.0], "counts": [700, 650, 40]}
    status, answer = _post(client, COMPARISONS, {"first": {"kind": "histogram", **SCRAPE}, "second": other})
    assert status == 200, answer
    assert answer["first"]["kind"] == "histogram"
    assert answer["distribution_test"]["cell_edges"] == [0.0, 0.1, 0.3, 1.0]
    assert answer["distribution_test"]["p_value"] is not None
    assert "bins_coarsened" in [w["code"] for w in answer["warnings"]]
    broken = {**SCRAPE, "count": 7}
    status, problem = _post(client, COMPARISONS, {"first": other, "second": {"kind": "histogram", **broken}})
    assert status == 422 and problem["errors"][0]["path"] == "$.second.count"
