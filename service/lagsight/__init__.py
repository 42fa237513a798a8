"""Lagsight: is what is left of a time series just white noise?

A stateless HTTP service. Start it with ``lagsight serve`` and POST a series::

    curl -s -X POST localhost:8000/v1/diagnostics \\
         -H 'content-type: application/json' -d '{"values": [3.1, 2.7, 3.4, 2.9, 3.3, 2.8]}'

In Python, without a server, the same answers come from :mod:`lagsight.api`::

    >>> import lagsight
    >>> lagsight.diagnose([3.1, 2.7, 3.4, 2.9, 3.3, 2.8, 3.0, 3.5, 2.6, 3.2])["verdict"]["white_noise"]
    True

``lagsight.diagnose_many(frame)`` does a long pandas DataFrame of many series; ``lagsight.model_check``,
``lagsight.driver_check`` and ``lagsight.stability`` answer as the routes that follow a diagnosis; and
``lagsight.distributed.diagnose_dask(ddf)`` a dask DataFrame (the optional extra ``lagsight[dask]``).
Errors are raised as :class:`lagsight.LagsightError`, carrying the service's problem details.

The app comes from the factory::

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

Beside them: ``app`` (the factory), ``api`` and ``tables`` (the Python API), ``distributed`` (the Dask
path), ``handling`` (a request's content checked, prepared and planned, for the views and the API alike),
``pipeline`` (runs inputs -> engine -> consult -> outputs), ``options`` and ``config`` (defaults, limits,
settings) and ``problems`` (the error type).
pyproject.toml's import-linter contracts keep the imports running one way.
"""
from lagsight.version import __version__


def create_app(config=None):
    """Build the Flask application (see :func:`lagsight.app.create_app`)."""
    from lagsight.app import create_app as _create_app

    return _create_app(config)


#: Names of the Python API, imported from lagsight.api on first use (``import lagsight`` stays light).
_API = ("diagnose", "diagnose_many", "model_check", "driver_check", "stability", "LagsightError")


def __getattr__(name: str):
    if name in _API:
        from lagsight import api

        return getattr(api, name)
    raise AttributeError(f"module 'lagsight' has no attribute {name!r}")


__all__ = ["create_app", "diagnose", "diagnose_many", "model_check", "driver_check", "stability", "LagsightError",
           "__version__"]
