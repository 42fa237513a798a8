"""POST /v1/diagnostics: the single-series diagnosis."""
from __future__ import annotations

from flask import Blueprint, current_app, request
from marshmallow import Schema, ValidationError

from ..payload import read_json_object
from ..pipeline import plan_for, run
from ..problems import Problem, flatten_messages
from ..schema import DiagnosticsRequest
from ..serialisation import json_response
from ..series import prepare

bp = Blueprint("diagnostics", __name__)
_SCHEMA = DiagnosticsRequest()


def load(schema: Schema, body: dict) -> dict:
    """Validate a parsed body; a failure becomes a 422 with a pointer per bad field."""
    try:
        return schema.load(body)
    except ValidationError as err:
        errors = flatten_messages(err.messages)
        raise Problem("invalid-content", f"{len(errors)} field(s) are invalid; see errors.", errors) from None


@bp.post("/v1/diagnostics")
def diagnose():
    """Diagnose one series and answer with its report."""
    data = load(_SCHEMA, read_json_object(request))
    cfg = current_app.config
    series = prepare(data, cfg["MAX_POINTS"])
    plan = plan_for(series, data, cfg)
    return json_response(run([(series, plan)])[0])
