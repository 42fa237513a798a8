"""Contract fuzzing: schemathesis generates requests from openapi/openapi.yaml for every operation.

Each generated request (valid and invalid bodies, odd headers and query strings) goes to the in-process app and
every schemathesis 4 check runs on its answer: not_a_server_error, status_code_conformance,
content_type_conformance, response_schema_conformance, response_headers_conformance, positive_data_acceptance,
negative_data_rejection, missing_required_header, unsupported_method, allow_header_conformance, ignored_auth,
use_after_free, ensure_resource_availability, max_response_time (unset here). None is excluded.

Two of them meet rules that JSON Schema cannot state, and there the test decides before handing the answer to
schemathesis's own check:

- positive_data_acceptance: a schema-valid request refused with 422 (or a text/csv body with 400 malformed-csv)
  passes only when *every* error in the problem is one of RULES_BEYOND_THE_SCHEMA below (a count of non-null
  values, lengths that must match, limits relative to the series' length, the deployment's max_lag, text that
  must read as numbers or dates). Any other refusal of schema-valid data goes to schemathesis's check and fails.
- negative_data_rejection on the batch route: one invalid series is answered in its own slot of a 200 answer
  (one bad series never sinks the others), so a schema-violating batch answered 200 passes only when a result in
  it carries a problem; otherwise schemathesis's check runs and fails.
"""
from __future__ import annotations

import re
from collections import Counter

import hypothesis
import pytest
import schemathesis
from schemathesis.checks import negative_data_rejection, positive_data_acceptance
from schemathesis.core.failures import FailureGroup
from threadpoolctl import threadpool_limits

from lagsight import create_app

APP = create_app({"TESTING": True})
SCHEMA = schemathesis.openapi.from_wsgi("/openapi.json", APP)
#: Per operation and phase; schemathesis adds its coverage phase (most of the requests) and the examples: about
#: 2,100 requests in 50-70 s on the shared 2-core machine.
MAX_EXAMPLES = 50
MIN_TOTAL_REQUESTS = 1000

#: Rules the service applies that JSON Schema cannot state (each is also in the operation's description in
#: openapi/openapi.yaml or in docs/DATA_IN_OUT.md): a regular expression over one error's detail and why.
RULES_BEYOND_THE_SCHEMA = {
    r"^Need at least \d+ (usable|observed) values, got \d+\.$": "a count of the non-null values",
    r"^\d+ values? (is|are) missing \(null\), the first at index \d+; send missing = ":
        "nulls only with missing interpolate or pairwise (a rule across two fields)",
    r"^The driver check needs complete series": "missing pairwise is refused on /v1/driver-check only",
    r"^Must have the same length as values \(\d+\), got \d+\.$": "two arrays of equal length",
    r"^The period \(\d+\) must be less than the number of values \(\d+\)\.$": "relative to the series' length",
    r"^max_lag must be less than the number of usable values": "relative to the series' length",
    r"^max_lag must be at most a quarter of the values": "relative to the series' length",
    r"^model_df \(parameters of the fitted model\) must be less than the number of usable values":
        "relative to the series' length",
    r"^window \(\d+\) must be at most the number of values \(\d+\)\.$": "relative to the series' length",
    r"^step \(\d+\) must be at most the window \(\d+\)": "relative to another field",
    r"^max_lag \(\d+\) must be below the window \(\d+\)": "relative to another field",
    r"^max_lag must be at most \d+ \(this deployment's limit\)": "the deployment's limit (LAGSIGHT_MAX_LAG)",
    r"^horizon must be at most max_lag \(\d+\) so that a lag is left to test": "relative to another field",
    r"^Monte Carlo p-values simulate an i.i.d. null; with a horizon above 1": "a rule across two fields",
    r"^A seasonal difference needs a period": "a rule across two fields (or the timestamps' spacing)",
    r"^Each test may be named once\.$": "names unique within one comma-separated string",
    r"^The (log|Box-Cox) transform needs every value to be positive": "depends on the values",
    r"^No order of the search could be fitted and converge": "depends on the values (the fits' convergence)",
    r"^The driver and the series share \d+ values; at least \d+ are needed\.$": "depends on the time labels",
    r"^The series is constant after the (log|Box-Cox) transform": "depends on the values",
    r"^(Seasonal differencing|Differencing) .*leaves fewer than \d+ points": "relative to the series' length",
    r"^Only with an explicit order: \"suggested\" chooses it\.$": "a rule across two fields",
    r"^p \(\d+\) must be less than the seasonal period s \(\d+\) when P > 0": "a rule across two fields",
    r"^q \(\d+\) must be less than the seasonal period s \(\d+\) when Q > 0": "a rule across two fields",
    r"^Each driver needs its own name\.$": "names unique across the items of an array",
    r"^The transforms leave \d+ observed points; at least \d+ are needed\.$": "depends on the values",
    r"^Lag \d+ has only \d+ pairs of observed values": "depends on where the values are missing",
    r"^Must be a number or null, got str\.$": "GET values: numbers written as text in one string",
    r"^Length must be between 1 and 64\.$": "GET timestamps: each comma-separated item's length",
    r"^Must be a number between -5 and 5, or \"estimate\"\.$": "box_cox as text in the query string",
    r"^Not an ISO 8601 date or date-time": "timestamps as text (dates and date-times both)",
    r"is not a finite number\.$": "CSV cells and query text must read as numbers",
    r"^The file has \d+ columns ": "the CSV's value column is chosen by its content",
    r"^Line \d+": "CSV syntax (quotes, NUL bytes, encoding): a string schema cannot state it",
}
_RULES = [re.compile(pattern) for pattern in RULES_BEYOND_THE_SCHEMA]
SENT: Counter = Counter()
RULE_HITS: Counter = Counter()


def _problem_details(response) -> list[str] | None:
    """The error details of a problem answer, or None when it is not a problem with details."""
    if not response.headers.get("content-type", [""])[0].startswith("application/problem+json"):
        return None
    body = response.json()
    errors = body.get("errors") or []
    return [e.get("detail", "") for e in errors] or [body.get("detail", "")]


def accepted_unless_refused_by(rules):
    """schemathesis's positive_data_acceptance, except for a refusal whose every error names one of ``rules``."""

    def positive_data_accepted_unless_a_rule_beyond_the_schema(ctx, response, case):
        refusable = response.status_code == 422 or (
            response.status_code == 400 and case.media_type == "text/csv"
            and response.json().get("type") == "urn:lagsight:problem:malformed-csv")
        if case.meta is not None and case.meta.generation.mode.is_positive and refusable:
            details = _problem_details(response)
            if details and all(any(rule.search(d) for rule in rules) for d in details):
                RULE_HITS.update(next(r.pattern for r in rules if r.search(d)) for d in details)
                return None
        return positive_data_acceptance(ctx, response, case)

    return positive_data_accepted_unless_a_rule_beyond_the_schema


def negative_data_rejected_or_reported_per_item(ctx, response, case):
    """schemathesis's negative_data_rejection, except a batch answered 200 with a problem in a result's slot."""
    if (case.operation.label == "POST /v1/diagnostics/batch" and response.status_code == 200
            and response.headers.get("content-type", [""])[0].startswith("application/json")):
        if any(result.get("error") for result in response.json().get("results", [])):
            return None
    return negative_data_rejection(ctx, response, case)


@pytest.fixture(scope="module", autouse=True)
def one_blas_thread():
    """One BLAS thread, as in a gunicorn worker (serving/gunicorn_conf.py): with BLAS threads competing for the
    cores, the Kalman filter behind /v1/model-check runs several times slower."""
    with threadpool_limits(1):
        yield


@SCHEMA.parametrize()
@hypothesis.settings(
    max_examples=MAX_EXAMPLES, deadline=None, derandomize=True, database=None,
    suppress_health_check=list(hypothesis.HealthCheck),
)
def test_every_operation_answers_within_its_contract(case):
    response = case.call_and_validate(
        excluded_checks=[positive_data_acceptance, negative_data_rejection],
        additional_checks=[accepted_unless_refused_by(_RULES),
                           negative_data_rejected_or_reported_per_item],
    )
    SENT[case.operation.label] += 1
    assert response.status_code < 500, (case.operation.label, response.status_code, response.text[:500])


def test_fuzzing_sent_enough_requests_across_all_operations():
    operations = {op.ok().label for op in SCHEMA.get_all_operations()}
    assert set(SENT) == operations, sorted(operations - set(SENT))
    print(f"\nschemathesis requests per operation: {dict(SENT)}; total {sum(SENT.values())}; "
          f"schema-valid requests refused by a rule beyond the schema: {dict(RULE_HITS)}")
    assert sum(SENT.values()) >= MIN_TOTAL_REQUESTS, dict(SENT)


def test_a_refusal_outside_the_listed_rules_still_fails_the_positive_check():
    """The exception for rules beyond the schema is not a blanket pass: a generated schema-valid body (an empty
    `values`) is refused with "Need at least 3 usable values"; it passes with that rule listed and fails the
    positive check without it."""
    operation = SCHEMA["/v1/diagnostics"]["POST"]
    strategy = operation.as_strategy(generation_mode=schemathesis.GenerationMode.POSITIVE)
    case = hypothesis.find(strategy, lambda c: c.media_type == "application/json",
                           settings=hypothesis.settings(database=None, max_examples=500))
    assert case.body == {"values": []}  # the smallest schema-valid JSON body
    response = case.call()
    assert response.status_code == 422
    case.validate_response(response, checks=[accepted_unless_refused_by(_RULES)])
    others = [rule for rule in _RULES if not rule.search("Need at least 3 usable values, got 0.")]
    with pytest.raises(FailureGroup) as failed:
        case.validate_response(response, checks=[accepted_unless_refused_by(others)])
    assert [type(f).__name__ for f in failed.value.exceptions] == ["RejectedPositiveData"]


def test_the_query_parameter_tests_names_exactly_the_service_tests():
    """The spec's pattern for the comma-separated `tests` lists the same names as the service (options.TEST_NAMES),
    so a schema-valid `tests` is never refused as unknown and an unknown name is schema-invalid."""
    from lagsight.options import TEST_NAMES

    pattern = APP.extensions["lagsight.spec"]["components"]["parameters"]["tests"]["schema"]["pattern"]
    assert pattern == "^({0})(,({0}))*$".format("|".join(TEST_NAMES))
