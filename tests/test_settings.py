"""Settings.from_env: defaults, parsing and rejection of bad settings (always an explicit mapping)."""

from __future__ import annotations

from dataclasses import fields

import pytest

from tailgauge.settings import Settings, SettingsError

FIELDS = [f.name for f in fields(Settings)]


def test_defaults_from_an_empty_environment():
    assert Settings.from_env({}) == Settings()
    defaults = Settings()
    assert defaults.max_body_bytes == 32 * 1024 * 1024
    assert defaults.max_values == 2_000_000
    assert defaults.max_moment_order == 12
    assert defaults.max_probabilities == 1_000
    assert defaults.max_modes_listed == 100


def test_other_variables_are_ignored():
    environ = {"PATH": "/usr/bin", "HOME": "/root", "TAILGAUGEX": "1", "tailgauge_max_values": "5"}
    assert Settings.from_env(environ) == Settings()


@pytest.mark.parametrize(
    ("name", "raw", "expected"),
    [
        ("max_body_bytes", "4096", 4096),
        ("max_values", "1_000", 1000),
        ("max_values", " 25 ", 25),
        ("max_moment_order", "6", 6),
        ("max_probabilities", "+10", 10),
        ("max_modes_listed", "1", 1),
    ],
)
def test_each_setting_is_parsed(name, raw, expected):
    settings = Settings.from_env({f"TAILGAUGE_{name.upper()}": raw})
    assert getattr(settings, name) == expected
    for other in FIELDS:
        if other != name:
            assert getattr(settings, other) == getattr(Settings(), other)


def test_every_field_is_settable_together():
    environ = {
        "TAILGAUGE_MAX_BODY_BYTES": "2048",
        "TAILGAUGE_MAX_VALUES": "10",
        "TAILGAUGE_MAX_MOMENT_ORDER": "4",
        "TAILGAUGE_MAX_PROBABILITIES": "3",
        "TAILGAUGE_MAX_MODES_LISTED": "7",
    }
    assert Settings.from_env(environ) == Settings(
        max_body_bytes=2048, max_values=10, max_moment_order=4, max_probabilities=3, max_modes_listed=7
    )


@pytest.mark.parametrize(
    "key", ["TAILGAUGE_MAX_VALUE", "TAILGAUGE_WORKERS", "TAILGAUGE_", "TAILGAUGE__BOUNDS"]
)
def test_unknown_names_are_rejected(key):
    with pytest.raises(SettingsError, match="unknown"):
        Settings.from_env({key: "10"})


@pytest.mark.parametrize("raw", ["", "ten", "1.5", "1e3", "0x10", "12abc", "true"])
def test_non_integers_are_rejected(raw):
    with pytest.raises(SettingsError, match="TAILGAUGE_MAX_VALUES"):
        Settings.from_env({"TAILGAUGE_MAX_VALUES": raw})


@pytest.mark.parametrize(
    ("name", "raw"),
    [
        ("max_body_bytes", "1023"),
        ("max_body_bytes", str(1024**3 + 1)),
        ("max_values", "0"),
        ("max_values", "-5"),
        ("max_values", "100000001"),
        ("max_moment_order", "3"),
        ("max_moment_order", "13"),  # above the schema's ceiling: could never be reached
        ("max_probabilities", "0"),
        ("max_probabilities", "1001"),
        ("max_modes_listed", "0"),
    ],
)
def test_out_of_bounds_are_rejected(name, raw):
    with pytest.raises(SettingsError, match=name):
        Settings.from_env({f"TAILGAUGE_{name.upper()}": raw})


@pytest.mark.parametrize(
    ("name", "value"),
    [
        ("max_body_bytes", 1024),
        ("max_body_bytes", 1024**3),
        ("max_moment_order", 4),
        ("max_moment_order", 12),
        ("max_probabilities", 1000),
    ],
)
def test_bounds_are_inclusive(name, value):
    assert getattr(Settings.from_env({f"TAILGAUGE_{name.upper()}": str(value)}), name) == value


@pytest.mark.parametrize("value", [True, 10.0, "10", None])
def test_direct_construction_checks_types(value):
    with pytest.raises(SettingsError):
        Settings(max_values=value)


def test_settings_error_is_a_value_error():
    assert issubclass(SettingsError, ValueError)


def test_tokens_origins_and_switches_are_parsed():
    settings = Settings.from_env(
        {
            "TAILGAUGE_API_TOKENS": " roastery-token-0123456789 , courier-token-9876543210,",
            "TAILGAUGE_METRICS_REQUIRE_TOKEN": "yes",
            "TAILGAUGE_CORS_ORIGINS": "https://dash.kestrel-hill.example,http://127.0.0.1:8080",
            "TAILGAUGE_REQUEST_LOG": "0",
        }
    )
    assert settings.api_tokens == ("roastery-token-0123456789", "courier-token-9876543210")
    assert settings.metrics_require_token is True and settings.request_log is False
    assert settings.cors_origins == ("https://dash.kestrel-hill.example", "http://127.0.0.1:8080")


def test_tokens_never_appear_in_the_settings_repr():
    settings = Settings(api_tokens=("roastery-token-0123456789",))
    assert "roastery-token" not in repr(settings)


@pytest.mark.parametrize(
    ("key", "raw"),
    [
        ("TAILGAUGE_API_TOKENS", "short"),
        ("TAILGAUGE_API_TOKENS", "has spaces inside it ok"),
        ("TAILGAUGE_METRICS_REQUIRE_TOKEN", "maybe"),
        ("TAILGAUGE_CORS_ORIGINS", "dash.example"),
        ("TAILGAUGE_REQUEST_LOG", "2"),
    ],
)
def test_bad_tokens_origins_and_switches_are_rejected(key, raw):
    with pytest.raises(SettingsError) as caught:
        Settings.from_env({key: raw})
    if key == "TAILGAUGE_API_TOKENS":
        assert raw not in str(caught.value)  # a token (even a bad one) is never echoed
