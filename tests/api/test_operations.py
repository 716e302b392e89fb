"""The endpoint table: one entry per operation, from which the routes and the document are built."""

from __future__ import annotations

import pytest
from litestar import Litestar

from tailgauge.api import operations, routes
from tailgauge.api.operations import OPERATIONS


def test_operation_ids_and_routes_are_unique():
    ids = [op.operation_id for op in OPERATIONS]
    assert len(ids) == len(set(ids))
    keys = [(op.method, op.path) for op in OPERATIONS]
    assert len(keys) == len(set(keys))
    assert set(operations.OPERATION_IDS) == set(ids)


def test_every_operation_becomes_one_route_with_its_path_method_and_name():
    handlers = routes.handlers()
    assert len(handlers) == len(OPERATIONS)
    app = Litestar(route_handlers=handlers, openapi_config=None)
    served = {(route.path, method.lower()) for route in app.routes for method in route.methods}
    for handler, op in zip(handlers, OPERATIONS):
        assert handler.name == op.operation_id
        assert list(handler.paths) == [op.path]
        assert (op.path, op.method) in served, (op.method, op.path)
        assert not handler.include_in_schema  # the document is built by openapi.py from the same table
    # No route beyond the table (HEAD and OPTIONS are litestar's own answers).
    assert {key for key in served if key[1] not in {"head", "options"}} == {(op.path, op.method) for op in OPERATIONS}


def test_a_post_operation_answers_200_not_litestars_201(client):
    for op in OPERATIONS:
        if op.method == "post":
            response = client.post(op.path, json=op.example)
            assert response.status_code == 200, (op.path, response.text)


@pytest.mark.parametrize("change", ["missing", "extra"])
def test_a_body_without_an_operation_or_the_reverse_is_an_error(monkeypatch, change):
    bodies = dict(routes.BODIES)
    if change == "missing":
        del bodies["catalog"]
    else:
        bodies["undeclared"] = bodies["live"]
    monkeypatch.setattr(routes, "BODIES", bodies)
    with pytest.raises(RuntimeError, match="the endpoint table and the handler bodies disagree"):
        routes.handlers()


def test_compute_operations_declare_an_example_and_every_problem_status():
    for op in OPERATIONS:
        if op.method == "post":
            assert op.request is not None and op.example is not None, op.path
            assert set(op.problems) >= {400, 413, 415, 422}, op.path
        else:
            assert op.request is None and op.example is None, op.path
