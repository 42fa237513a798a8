"""The OpenAPI document is valid, served, and says what the schemas and options say."""
from __future__ import annotations

import math

import pytest
from marshmallow import missing, validate
from openapi_spec_validator import validate as validate_spec

from lagsight import options
from lagsight.inputs.drivers import DriverCheckRequest, DriverFields
from lagsight.inputs.model_check import ModelCheckRequest
from lagsight.inputs.schema import (
    BATCH_OVERRIDES,
    BatchRequest,
    BatchSeries,
    DiagnosticsRequest,
    NumberArray,
    SeriesId,
    StrictFloat,
    StrictInteger,
    TransformFields,
)
from lagsight.inputs.stability import StabilityRequest

from .spec_tools import assert_valid, spec


def test_spec_is_valid_openapi_3_1():
    validate_spec(spec())
    assert spec()["openapi"].startswith("3.1")


def test_spec_is_served_as_json(client):
    r = client.get("/openapi.json")
    assert r.status_code == 200 and r.is_json
    assert r.get_json() == spec()


def _range(field):
    for v in field.validators:
        if isinstance(v, validate.Range):
            return v
    return None


def _types(prop: dict) -> list:
    """JSON types a property allows, through oneOf alternatives."""
    if "oneOf" in prop:
        return [t for alt in prop["oneOf"] for t in _types(alt)]
    if "$ref" in prop:
        return ["object"]
    return prop["type"] if isinstance(prop["type"], list) else [prop["type"]]


@pytest.mark.parametrize("schema_cls,component", [
    (DiagnosticsRequest, "DiagnosticsRequest"), (BatchRequest, "BatchRequest"), (BatchSeries, "BatchSeries"),
    (TransformFields, "Transform"), (ModelCheckRequest, "ModelCheckRequest"),
    (StabilityRequest, "StabilityRequest"), (DriverCheckRequest, "DriverCheckRequest"), (DriverFields, "Driver"),
])
def test_request_schema_agrees_with_spec(schema_cls, component):
    """Fields, required, defaults, bounds and nullability read the same in marshmallow and the spec."""
    doc = spec()["components"]["schemas"][component]
    fields = schema_cls().fields
    assert set(fields) == set(doc["properties"])
    assert {k for k, f in fields.items() if f.required} == set(doc.get("required", []))
    assert doc.get("additionalProperties") is False  # unknown fields rejected, as the schema does
    for name, field in fields.items():
        prop = doc["properties"][name]
        types = _types(prop)
        assert ("null" in types) == bool(field.allow_none), name
        if not field.required and field.load_default is missing:  # absent stays absent (batch overrides)
            assert "default" not in prop, name
        elif not field.required and field.load_default is not None:
            assert prop["default"] == field.load_default, name
        elif not field.required:
            assert prop.get("default", None) is None, name
        if isinstance(field, StrictInteger):
            assert "integer" in types, name
        if isinstance(field, StrictFloat):
            assert "number" in types, name
        for v in field.validators:
            if isinstance(v, validate.OneOf):
                assert [c for c in prop["enum"] if c is not None] == list(v.choices), name
        if isinstance(field, SeriesId):
            assert set(types) == {"string", "integer"} and prop["maxLength"] == options.MAX_ID_LENGTH, name
        if isinstance(field, NumberArray):
            assert prop["type"] == "array" and set(prop["items"]["type"]) == {"number", "null"}
        choices = next((v.choices for v in field.validators if isinstance(v, validate.OneOf)), None)
        if choices is not None:
            assert [c for c in prop["enum"] if c is not None] == list(choices), name
        inner = getattr(field, "inner", None)
        inner_choices = next((v.choices for v in getattr(inner, "validators", []) if isinstance(v, validate.OneOf)), None)
        if inner_choices is not None:
            assert list(prop["items"]["enum"]) == list(inner_choices), name
        rng = _range(field)
        if rng is not None:
            lo_key = "minimum" if rng.min_inclusive else "exclusiveMinimum"
            hi_key = "maximum" if rng.max_inclusive else "exclusiveMaximum"
            if rng.min is not None:
                assert prop[lo_key] == rng.min, name
            if rng.max is not None:
                assert prop[hi_key] == rng.max, name


def test_defaults_read_the_same_in_options_schema_and_methods(client):
    methods = client.get("/v1/methods").get_json()
    req = spec()["components"]["schemas"]["DiagnosticsRequest"]["properties"]
    assert req["confidence"]["default"] == options.DEFAULT_CONFIDENCE == methods["options"]["confidence"]["default"]
    assert req["model_df"]["default"] == options.DEFAULT_MODEL_DF == methods["options"]["model_df"]["default"]
    assert req["period"]["minimum"] == options.MIN_PERIOD == methods["options"]["period"]["minimum"]
    assert "10 log10 n" in req["max_lag"]["description"] and "10 log10 n" in methods["options"]["max_lag"]["default"]
    assert req["missing"]["default"] == options.DEFAULT_MISSING == methods["options"]["missing"]["default"]
    assert req["missing"]["enum"] == list(options.MISSING_METHODS) == methods["options"]["missing"]["enum"]
    transform = spec()["components"]["schemas"]["Transform"]
    assert list(transform["properties"]) == list(options.TRANSFORM_ORDER) == methods["options"]["transform"]["order"]
    assert transform["properties"]["difference"]["maximum"] == options.MAX_DIFFERENCE
    assert transform["properties"]["seasonal_difference"]["maximum"] == options.MAX_SEASONAL_DIFFERENCE
    assert transform["properties"]["box_cox"]["oneOf"][0]["maximum"] == options.MAX_BOX_COX_LAMBDA
    spacing = req["timestamps"]["description"]
    for name, period in options.PERIOD_BY_SPACING.items():
        assert (f"{name} {period}" if period else name) in spacing, name
        assert methods["timestamps"]["periods"][name] == period


def test_batch_options_read_the_same_as_the_single_route_and_methods(client):
    single = spec()["components"]["schemas"]["DiagnosticsRequest"]["properties"]
    batch = spec()["components"]["schemas"]["BatchRequest"]["properties"]
    item = spec()["components"]["schemas"]["BatchSeries"]["properties"]
    bounds = ("type", "minimum", "exclusiveMinimum", "exclusiveMaximum")
    for key in BATCH_OVERRIDES:
        assert {k: batch[key].get(k) for k in (*bounds, "default")} == {k: single[key].get(k) for k in (*bounds, "default")}
        assert {k: item[key].get(k) for k in bounds} == {k: single[key].get(k) for k in bounds}
    methods = client.get("/v1/methods").get_json()
    assert methods["batch"]["per_series_overrides"] == list(BATCH_OVERRIDES)
    assert methods["limits"]["max_series"] == options.DEFAULT_LIMITS["max_series"]
    assert methods["limits"]["max_batch_points"] == options.DEFAULT_LIMITS["max_batch_points"]


def test_detail_option_and_brief_result_read_the_same_in_options_spec_and_methods(client):
    from lagsight.outputs.brief import FIELDS

    schemas = spec()["components"]["schemas"]
    detail = schemas["BatchRequest"]["properties"]["detail"]
    assert detail["enum"] == list(options.DETAIL_LEVELS) and detail["default"] == options.DEFAULT_DETAIL
    fields = schemas["BriefResultFields"]
    assert list(fields["properties"]) == list(FIELDS) == fields["required"]
    methods = client.get("/v1/methods").get_json()["batch"]["detail"]
    assert methods == {"default": options.DEFAULT_DETAIL, "enum": list(options.DETAIL_LEVELS),
                       "brief_fields": ["id", *FIELDS]}
    # A brief test entry is the full report's entry reduced: its fields are a subset, typed the same.
    brief_test, full_test = schemas["BriefTest"]["properties"], schemas["TestResult"]["properties"]
    for name, prop in brief_test.items():
        assert prop["type"] == full_test[name]["type"], name


def test_batch_report_has_the_report_fields_and_id():
    """A batch result has every field of the report (less what it shares) and its id; shared holds only report
    fields and the outputs/shared.py paths."""
    from lagsight.outputs.shared import PATHS

    schemas = spec()["components"]["schemas"]
    assert schemas["Report"]["allOf"] == [{"$ref": "#/components/schemas/ReportFields"}]
    report, batch = schemas["ReportFields"], schemas["BatchReport"]
    assert set(batch["properties"]) == {"id", *report["properties"]}
    assert set(batch["required"]) == {"id", *report["required"]} - {path[0] for path in PATHS if len(path) == 1}
    shared = schemas["BatchShared"]["properties"]
    assert set(shared) == {path[0] for path in PATHS} | {"tests"}
    for path in PATHS:
        if len(path) == 2:
            assert path[1] in shared[path[0]]["properties"], path


def test_problem_kinds_are_documented():
    from lagsight.problems import KINDS

    described = spec()["components"]["schemas"]["Problem"]["properties"]["type"]["description"]
    for slug in KINDS:
        assert slug in described


def test_methods_response_matches_spec(client):
    assert_valid(client.get("/v1/methods").get_json(), "Methods")


@pytest.mark.parametrize("n,period,model_df", [(3, None, 0), (12, None, 1), (60, 12, 2), (500, 7, 0), (40, None, 30)])
def test_reports_match_spec_and_contain_no_nan(client, n, period, model_df):
    import numpy as np

    x = np.random.default_rng(n).standard_normal(n).tolist()
    r = client.post("/v1/diagnostics", json={"values": x, "period": period, "model_df": model_df})
    assert r.status_code == 200, r.get_json()
    body = r.get_json()
    assert_valid(body, "Report")
    assert b"NaN" not in r.data and b"Infinity" not in r.data

    def walk(v):
        if isinstance(v, float):
            assert math.isfinite(v)
        elif isinstance(v, dict):
            for w in v.values():
                walk(w)
        elif isinstance(v, list):
            for w in v:
                walk(w)

    walk(body)


def test_query_parameters_agree_with_the_spec():
    """The query parameters the diagnostics route takes are the ones documented, with the same enums."""
    from lagsight.web import query

    paths = spec()["paths"]["/v1/diagnostics"]
    params = spec()["components"]["parameters"]

    def names(listed):
        return {params[p["$ref"].rsplit("/", 1)[1]]["name"] if "$ref" in p else p["name"] for p in listed}

    analysis = set(query.ANALYSIS_PARAMS) | set(query.TRANSFORM_PARAMS)
    # POST declares only what applies to every body; what applies to a text/csv body alone is listed apart
    assert names(paths["post"]["parameters"]) == set(query.OUTPUT_PARAMS)
    assert names(paths["post"]["x-csv-only-parameters"]) == set(query.CSV_PARAMS) | analysis
    assert names(paths["get"]["parameters"]) == set(query.OUTPUT_PARAMS) | analysis | {"values", "timestamps"}
    assert "parameters" not in spec()["paths"]["/v1/diagnostics/batch"]["post"]
    assert params["format"]["schema"]["enum"] == list(options.FORMATS)
    assert params["chart"]["schema"]["enum"] == list(options.CHART_KINDS)
    assert params["chart"]["schema"]["default"] == options.DEFAULT_CHART
    assert params["missing"]["schema"]["enum"] == list(options.MISSING_METHODS)
    assert params["band"]["schema"]["enum"] == list(options.BAND_KINDS)
    assert params["p_values"]["schema"]["enum"] == list(options.P_VALUE_METHODS)
    assert params["replicates"]["schema"]["default"] == options.DEFAULT_REPLICATES
    assert set(params["delimiter"]["schema"]["enum"]) == set(options.CSV_DELIMITERS) | set(
        options.CSV_DELIMITERS.values())
    assert set(params["decimal"]["schema"]["enum"]) == set(options.CSV_DECIMALS) | set(options.CSV_DECIMALS.values())
    transform = spec()["components"]["schemas"]["Transform"]["properties"]
    for name in query.TRANSFORM_PARAMS:
        for bound in ("minimum", "maximum"):
            if bound in transform[name]:
                assert params[name]["schema"][bound] == transform[name][bound], name
    media = set(spec()["components"]["responses"]["Diagnosis"]["content"])
    assert media == set(options.FORMATS.values())
