"""The problem+json examples that openapi/openapi.yaml gives for bad input to the routes that follow a diagnosis
(mismatched lengths, a window larger than the series, a model that does not converge, a series too short for its
model) are what the service answers to the request body named beside each (x-request-body)."""
from __future__ import annotations

import pytest

from lagsight import create_app

from .spec_tools import assert_valid, spec

ROUTES = ("/v1/model-check", "/v1/driver-check", "/v1/stability")


def _examples():
    for route in ROUTES:
        answer = spec()["paths"][route]["post"]["responses"]["422"]["content"]["application/problem+json"]
        for name, example in answer["examples"].items():
            yield pytest.param(route, example, id=f"{route}:{name}")


@pytest.fixture(scope="module")
def client():
    return create_app({"TESTING": True}).test_client()


def test_every_route_documents_its_bad_input():
    names = {route: set(spec()["paths"][route]["post"]["responses"]["422"]["content"]["application/problem+json"]
                        ["examples"]) for route in ROUTES}
    assert {"no_convergence", "too_short"} <= names["/v1/model-check"]
    assert "mismatched_lengths" in names["/v1/driver-check"] and "window_too_large" in names["/v1/stability"]


@pytest.mark.parametrize("route,example", list(_examples()))
def test_the_documented_problem_is_answered(client, route, example):
    r = client.post(route, json=example["x-request-body"])
    assert r.status_code == 422 and r.content_type == "application/problem+json"
    got, documented = r.get_json(), example["value"]
    assert_valid(got, "Problem")
    assert_valid(documented, "Problem")
    assert {k: got[k] for k in ("type", "title", "status")} == {k: documented[k] for k in ("type", "title", "status")}
    assert got["instance"] == documented["instance"] == route
    assert [e["pointer"] for e in got["errors"]] == [e["pointer"] for e in documented["errors"]]
    for said, meant in zip(got["errors"], documented["errors"]):
        # The log-likelihood a non-converging fit reached is statsmodels' number, which may differ in its last
        # digits between platforms: the words before it must match.
        assert said["detail"].split("(log-likelihood")[0] == meant["detail"].split("(log-likelihood")[0]
