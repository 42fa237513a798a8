"""The application factory."""
from __future__ import annotations

import yaml
from flask import Flask

from lagsight import config as settings
from lagsight.web import errors, observability, security


def load_spec(path: str) -> dict:
    with open(path, encoding="utf-8") as fh:
        return yaml.safe_load(fh)


def create_app(config: dict | None = None) -> Flask:
    """Build the Flask app; ``config`` overrides settings (tests pass a dict)."""
    app = Flask("lagsight", static_folder=None)  # the page blueprint serves the static files
    # werkzeug would answer /v1//methods with a redirect whose Location it builds from the Host header;
    # such a path is a 404 problem instead (and web/errors.py turns any other routing redirect into one).
    app.url_map.merge_slashes = False
    app.config.update(settings.load(config))
    app.config["MAX_CONTENT_LENGTH"] = app.config["MAX_BODY_BYTES"]
    app.extensions["lagsight.spec"] = load_spec(app.config["OPENAPI_PATH"])
    observability.init_app(app)  # first: the request id and clock start before anything can fail
    security.init_app(app)
    errors.init_app(app)
    from lagsight.web import batch, diagnostics, drivers, meta, model_check, operations, page, stability

    app.register_blueprint(meta.bp)
    app.register_blueprint(operations.bp)
    app.register_blueprint(diagnostics.bp)
    app.register_blueprint(batch.bp)
    app.register_blueprint(model_check.bp)
    app.register_blueprint(stability.bp)
    app.register_blueprint(drivers.bp)
    app.register_blueprint(page.bp)
    return app
