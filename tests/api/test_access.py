"""Access control: optional bearer tokens, open probes, metrics by setting, CORS off by default."""

from __future__ import annotations

import hmac

import pytest

from tailgauge.api import app as app_module
from tailgauge.api.app import token_matches

SAMPLES = "/v1/descriptors/samples"
TOKEN = "roastery-token-0123456789"
OTHER = "courier-token-9876543210"
BODY = b'{"values": [1, 2, 3, 10]}'
JSON = {"content-type": "application/json"}


def _post(client, headers=None):
    return client.post(SAMPLES, content=BODY, headers={**JSON, **(headers or {})})


def test_no_tokens_configured_means_open(make_client):
    client = make_client(request_log=False)
    assert _post(client).status_code == 200


def test_missing_token_is_401_with_a_challenge(make_client):
    client = make_client(request_log=False, api_tokens=(TOKEN,))
    response = _post(client)
    assert response.status_code == 401
    assert response.headers["www-authenticate"].startswith("Bearer")
    problem = response.json()
    assert problem["type"] == "urn:tailgauge:problem:unauthorized"
    assert problem["errors"][0]["path"] == "header.authorization"
    assert TOKEN not in response.text


@pytest.mark.parametrize(
    "header",
    [f"Bearer {TOKEN}x", f"Bearer {TOKEN[:-1]}", f"Basic {TOKEN}", TOKEN, "Bearer ", f"Bearer {TOKEN.upper()}"],
)
def test_wrong_tokens_are_401(make_client, header):
    client = make_client(request_log=False, api_tokens=(TOKEN,))
    response = _post(client, {"authorization": header})
    assert response.status_code == 401
    assert TOKEN not in response.text


@pytest.mark.parametrize("token", [TOKEN, OTHER])
def test_any_configured_token_is_accepted(make_client, token):
    client = make_client(request_log=False, api_tokens=(TOKEN, OTHER))
    assert _post(client, {"authorization": f"Bearer {token}"}).status_code == 200
    assert _post(client, {"authorization": f"bearer {token}"}).status_code == 200
    assert client.get("/v1/catalog", headers={"authorization": f"Bearer {token}"}).status_code == 200
    assert client.get("/v1/catalog").status_code == 401


def test_comparison_is_constant_time_and_checks_every_token(monkeypatch):
    calls = []
    real = hmac.compare_digest

    def spy(a, b):
        calls.append((a, b))
        return real(a, b)

    monkeypatch.setattr(app_module.hmac, "compare_digest", spy)
    assert token_matches(TOKEN, (TOKEN, OTHER)) is True
    # The first token matched, yet the second was still compared: no early exit.
    assert [b for _, b in calls] == [TOKEN.encode(), OTHER.encode()]
    calls.clear()
    assert token_matches("nope-nope-nope-nope", (TOKEN, OTHER)) is False
    assert len(calls) == 2


@pytest.mark.parametrize("path", ["/health/live", "/health/ready", "/openapi.json", "/docs"])
def test_probes_and_schema_stay_open(make_client, path):
    client = make_client(request_log=False, api_tokens=(TOKEN,))
    assert client.get(path).status_code == 200


def test_metrics_open_unless_the_setting_protects_them(make_client):
    open_client = make_client(request_log=False, api_tokens=(TOKEN,))
    assert open_client.get("/metrics").status_code == 200
    closed = make_client(request_log=False, api_tokens=(TOKEN,), metrics_require_token=True)
    assert closed.get("/metrics").status_code == 401
    assert closed.get("/metrics", headers={"authorization": f"Bearer {TOKEN}"}).status_code == 200


def test_cors_is_off_unless_configured(make_client):
    origin = {"origin": "https://dashboards.kestrel-hill.example"}
    plain = make_client(request_log=False)
    response = _post(plain, origin)
    assert response.status_code == 200
    assert "access-control-allow-origin" not in response.headers
    allowed = make_client(request_log=False, cors_origins=("https://dashboards.kestrel-hill.example",))
    response = _post(allowed, origin)
    assert response.headers["access-control-allow-origin"] == "https://dashboards.kestrel-hill.example"
    other = _post(allowed, {"origin": "https://elsewhere.example"})
    assert "access-control-allow-origin" not in other.headers


def test_an_internal_error_shows_no_trace_or_path(make_client, monkeypatch):
    from tailgauge.api import endpoints

    def explode(*args, **kwargs):
        raise RuntimeError(f"secret detail at {__file__} line 1")

    monkeypatch.setattr(endpoints, "describe", explode)
    client = make_client(request_log=False)
    response = _post(client)
    assert response.status_code == 500
    text = response.text
    assert "Traceback" not in text and __file__ not in text and "secret" not in text and ".py" not in text
    assert response.json()["type"] == "urn:tailgauge:problem:internal-error"


# Regression: with two Authorization headers the first one won silently.
@pytest.mark.parametrize("tokens", [(), (TOKEN,)])
@pytest.mark.parametrize("second", [TOKEN, OTHER])
def test_two_authorization_headers_are_a_400_naming_the_header(make_client, tokens, second):
    client = make_client(request_log=False, api_tokens=tokens)
    headers = [("content-type", "application/json"), ("authorization", f"Bearer {TOKEN}"),
               ("authorization", f"Bearer {second}")]
    for response in (client.post(SAMPLES, content=BODY, headers=headers), client.get("/v1/catalog", headers=headers)):
        assert response.status_code == 400
        problem = response.json()
        assert problem["type"] == "urn:tailgauge:problem:invalid-header"
        assert problem["errors"] == [{"path": "header.authorization", "message": "must appear at most once"}]
        assert TOKEN not in response.text
    # Open routes never read the header.
    assert client.get("/health/live", headers=headers).status_code == 200
