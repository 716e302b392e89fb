"""The schema page's assets (service/tailgauge/api/docs.py): files of the bundle, and a 404 problem for anything else.

Regression: ``/docs/assets/%00``, ``/docs/assets/..%00/x`` and names over 255 characters answered
500 and logged a 3.3 KB traceback, tokens or not; any name that is not a file of the bundle is now
a 404 problem, and nothing is logged.
"""

from __future__ import annotations

import logging

import pytest
from swagger_ui_bundle import swagger_ui_path

NOT_FILES = [
    "/docs/assets/%00",
    "/docs/assets/..%00/x",
    "/docs/assets/" + "a" * 256,
    "/docs/assets/" + "b" * 5000,
    "/docs/assets/swagger-ui.css%00.png",
    "/docs/assets/..%2F..%2Fopenapi.json",
    "/docs/assets/%2e%2e",
    "/docs/assets/",
    "/docs/assets/nothing-here.js",
    "/docs/assets/%E2%80%A8",
]


@pytest.mark.parametrize("path", NOT_FILES)
@pytest.mark.parametrize("tokens", [(), ("roastery-token-0123456789",)])
def test_anything_but_a_bundle_file_is_a_404_problem_and_logs_nothing(make_client, caplog, path, tokens):
    client = make_client(request_log=False, api_tokens=tokens)
    with caplog.at_level(logging.DEBUG, logger="tailgauge"):
        response = client.get(path)
    assert response.status_code == 404, response.text
    assert response.headers["content-type"] == "application/problem+json"
    problem = response.json()
    assert problem["type"] == "urn:tailgauge:problem:not-found" and problem["status"] == 404
    assert problem["errors"][0]["path"] == "path"
    assert not [record for record in caplog.records if record.levelno >= logging.WARNING]


def test_every_file_of_the_bundle_is_served_with_its_bytes(client):
    import os

    names = sorted(os.listdir(swagger_ui_path))
    assert "swagger-ui-bundle.js" in names
    for name in names:
        response = client.get(f"/docs/assets/{name}")
        assert response.status_code == 200, name
        with open(os.path.join(swagger_ui_path, name), "rb") as file:
            assert response.content == file.read(), name
