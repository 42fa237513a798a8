"""Lagsight: is what is left of a time series just white noise?

A stateless HTTP service. Start it with ``lagsight serve`` and POST a series::

    curl -s -X POST localhost:8000/v1/diagnostics \\
         -H 'content-type: application/json' -d '{"values": [3.1, 2.7, 3.4, 2.9, 3.3, 2.8]}'

In Python the app comes from the factory::

    >>> from lagsight import create_app
    >>> client = create_app().test_client()
    >>> client.post("/v1/diagnostics", json={"values": [1, 3, 2, 5, 4, 6]}).status_code
    200

The package follows the one-way flow of a request, one folder per stage::

    web/      HTTP: blueprints, request bodies, query parameters, headers, logs, metrics
    inputs/   validation, CSV, timestamps, missing values, transforms -> prepared series
    engine/   pure numpy/scipy/statsmodels, vectorised over many series
    consult/  one decision per series -> verdict, structure, sentences, advice, cautions
    outputs/  report shape, brief results, charts, images, CSV and JSON bytes
    serving/  the ``lagsight`` command, gunicorn settings, WSGI entry point

Beside them: ``app`` (the factory), ``pipeline`` (runs inputs -> engine -> consult -> outputs),
``options`` and ``config`` (defaults, limits, settings) and ``problems`` (the error type).
pyproject.toml's import-linter contracts keep the imports running one way.
"""
from lagsight.version import __version__


def create_app(config=None):
    """Build the Flask application (see :func:`lagsight.app.create_app`)."""
    from lagsight.app import create_app as _create_app

    return _create_app(config)


__all__ = ["create_app", "__version__"]
