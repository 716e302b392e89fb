"""options.descriptors over HTTP: what is not asked for is absent (not null), unknown names are a
400 listing the choices, and every endpoint (samples, tables, bins, merges, comparisons) honours it.

The reference for each shown value is the same request without the option.
"""

from __future__ import annotations

import pytest

from tailgauge.core.registry import SCALAR_DESCRIPTORS
from tailgauge.core.selection import CHOICES, MEMBERS

VALUES = [12.1, 9.8, 11.4, 10.2, 14.9, 10.0, 9.1, 13.3, 10.8, 30.5, 11.9, 10.4]
TABLE = {
    "outcomes": [{"value": v, "weight": w} for v, w in ((1, 3), (2, 8), (3, 5), (4, 1), (7, 2))], "weight_kind": "counts"
}
BINS = {"edges": [0, 5, 10, 15, 20, 30], "counts": [4, 18, 25, 9, 3]}


@pytest.mark.parametrize(
    "path,body",
    [("/v1/descriptors/samples", {"values": VALUES}), ("/v1/descriptors/table", TABLE), ("/v1/descriptors/bins", BINS)],
)
def test_only_what_is_asked_for_is_in_the_answer(client, post_json, path, body):
    full_response, full = post_json(client, body, path=path)
    assert full_response.status_code == 200
    asked = ["median", "spread", "quantiles"]
    response, part = post_json(client, {**body, "options": {"descriptors": asked}}, path=path)
    assert response.status_code == 200, response.text
    spread = {"variance", "standard_deviation", "coefficient_of_variation", "range", "interquartile_range",
              "median_absolute_deviation", "median_absolute_deviation_normal"}
    assert set(part["descriptors"]) == {"median"} | spread
    for name, shown in part["descriptors"].items():
        assert shown == full["descriptors"][name]
    assert part["quantiles"] == full["quantiles"]
    for member in set(MEMBERS) - {"quantiles"}:
        assert member not in part, member  # absent, not null
    assert {"kind", "size", "conventions", "warnings"} <= set(part)
    for warning in part["warnings"]:
        for name in warning["descriptors"]:
            assert name.partition("[")[0] in set(part["descriptors"]) | {"quantiles"}, warning


def test_unknown_and_empty_lists_are_refused_naming_the_field(client, post_json):
    response, problem = post_json(client, {"values": VALUES, "options": {"descriptors": ["mean", "average"]}})
    assert response.status_code == 400
    assert problem["errors"][0]["path"] == "$.options.descriptors[1]"
    for name in CHOICES:
        assert name in problem["errors"][0]["message"]
    response, problem = post_json(client, {"values": VALUES, "options": {"descriptors": []}})
    assert response.status_code == 400
    assert problem["errors"][0]["path"] == "$.options.descriptors"


def test_intervals_and_scores_with_a_selection(client, post_json):
    interval = {"method": "bca", "resamples": 999, "seed": 5}
    _, full = post_json(client, {"values": VALUES, "options": {"interval": interval, "score": [20.0]}})
    response, part = post_json(
        client, {"values": VALUES, "options": {"interval": interval, "score": [20.0], "descriptors": ["l_scale"]}}
    )
    assert response.status_code == 200, response.text
    assert part["descriptors"] == {"l_scale": full["descriptors"]["l_scale"]}
    assert part["descriptors"]["l_scale"]["interval"] is not None
    # Scores read the mean, sd, median and MAD, which are computed but not shown.
    assert part["scores"] == full["scores"]


def test_comparisons_and_merges_honour_the_selection(client, post_json):
    first, second = VALUES, [v * 1.1 + 0.5 for v in VALUES]
    body = {"first": {"kind": "samples", "values": first}, "second": {"kind": "samples", "values": second}}
    _, full = post_json(client, body, path="/v1/comparisons")
    response, part = post_json(client, {**body, "options": {"descriptors": ["variance", "skewness"]}}, path="/v1/comparisons")
    assert response.status_code == 200, response.text
    assert set(part["differences"]) == {"variance", "skewness"}
    assert set(part["ratios"]) == {"variance"}
    assert part["differences"]["skewness"] == full["differences"]["skewness"]
    assert "quantile_shifts" not in part and "standardized_quantiles" not in part
    assert set(part["first"]["descriptors"]) == {"variance", "skewness"}
    assert part["standardized_mean_difference"] == full["standardized_mean_difference"]

    _, described = post_json(client, {"values": VALUES, "options": {"partial_state": True}})
    state = described["partial_state"]
    response, merged = post_json(
        client, {"states": [state, state], "options": {"descriptors": ["mean", "moments"]}}, path="/v1/descriptors/merge"
    )
    assert response.status_code == 200, response.text
    assert set(merged["descriptors"]) == {"mean"}
    assert "moments" in merged and "quantiles" not in merged


def test_without_the_option_every_descriptor_and_member_is_there(describe):
    answer = describe(VALUES)
    assert list(answer["descriptors"]) == list(SCALAR_DESCRIPTORS)
    for member in set(MEMBERS) - {"grouping"}:
        assert member in answer
