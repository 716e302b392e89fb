"""The wire messages: each input kind's fields declared once, strict decoding, the package's API."""

from __future__ import annotations

import json

import msgspec
import pytest

from tailgauge.api import openapi, schemas

# (base Struct of an input kind's data, its endpoint's request, the comparison input of that kind)
KINDS = [
    (schemas.SamplesData, schemas.SamplesRequest, schemas.SamplesInput),
    (schemas.TableData, schemas.TableRequest, schemas.TableInput),
    (schemas.BinsData, schemas.BinsRequest, schemas.BinsInput),
    (schemas.HistogramData, schemas.HistogramRequest, schemas.HistogramInput),
]
# (request option set, comparison input option set) sharing the options that belong to the data
DATA_OPTIONS = [(schemas.SampleOptions, schemas.SamplesInputOptions), (schemas.TableOptions, schemas.TableInputOptions)]


def _names(struct: type) -> list[str]:
    return [f.name for f in msgspec.structs.fields(struct)]


@pytest.fixture(scope="module")
def components() -> dict:
    return json.loads(openapi.document_bytes())["components"]["schemas"]


@pytest.mark.parametrize(("data", "request_type", "input_type"), KINDS)
def test_request_and_comparison_input_share_the_kinds_fields(data, request_type, input_type, components):
    assert issubclass(request_type, data) and issubclass(input_type, data)
    shared = _names(data)
    assert shared, data
    assert _names(request_type)[: len(shared)] == shared
    assert _names(input_type)[: len(shared)] == shared
    published_request = components[request_type.__name__]["properties"]
    published_input = components[input_type.__name__]["properties"]
    for name in shared:
        # One declaration, one published description: the two schemas of a field are equal.
        assert published_request[name] == published_input[name], name
        assert published_request[name].get("description"), f"{data.__name__}.{name} has no description"


@pytest.mark.parametrize(("endpoint_options", "input_options"), DATA_OPTIONS)
def test_data_options_are_published_alike(endpoint_options, input_options, components):
    for name in _names(input_options):
        assert components[endpoint_options.__name__]["properties"][name] == (
            components[input_options.__name__]["properties"][name]
        ), name


@pytest.mark.parametrize("struct", [schemas.SamplesData, schemas.TableData, schemas.BinsData])
def test_the_data_bases_are_not_published_on_their_own(struct, components):
    # They are declarations to inherit from, not messages: no operation takes or returns one.
    assert struct.__name__ not in components


@pytest.mark.parametrize(
    ("options_type", "name"),
    [
        (schemas.BinOptions, "quantile_type"),
        (schemas.SampleOptions, "sheppard_correction"),
        (schemas.TableOptions, "sheppard_correction"),
        (schemas.MergeOptions, "interval"),
    ],
)
def test_a_choice_an_option_set_does_not_offer_is_still_an_unknown_field(options_type, name):
    """Such a choice is a read-only property (the core's default), never a decodable field."""
    assert name not in _names(options_type)
    with pytest.raises(msgspec.ValidationError, match=f"unknown field `{name}`"):
        msgspec.json.decode(json.dumps({name: None}).encode(), type=options_type)


def test_every_option_set_answers_the_cores_questions():
    questions = ["convention", "skewness_estimator", "kurtosis_estimator", "probabilities", "moment_order",
                 "score", "interval", "quantile_type", "sheppard_correction"]
    for options_type in (schemas.SampleOptions, schemas.TableOptions, schemas.BinOptions,
                         schemas.ComparisonOptions, schemas.MergeOptions):
        options = options_type()
        for question in questions:
            assert hasattr(options, question), (options_type.__name__, question)


def test_the_package_exports_every_message_once():
    exported = set(schemas.__all__)
    assert len(exported) == len(schemas.__all__)
    for name in exported:
        assert hasattr(schemas, name), name
    messages = {obj for obj in vars(schemas).values() if isinstance(obj, type) and issubclass(obj, schemas.Message)}
    assert {m.__name__ for m in messages} <= exported
