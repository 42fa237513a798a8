"""Lagsight: is what is left of a time series just white noise?

A stateless HTTP service. Start it with ``lagsight serve`` and POST a series::

    curl -s -X POST localhost:8000/v1/diagnostics \\
         -H 'content-type: application/json' -d '{"values": [3.1, 2.7, 3.4, 2.9, 3.3, 2.8]}'

In Python the app comes from the factory::

    >>> from lagsight import create_app
    >>> client = create_app().test_client()
    >>> client.post("/v1/diagnostics", json={"values": [1, 3, 2, 5, 4, 6]}).status_code
    200
"""
__version__ = "0.1.0"


def create_app(config=None):
    """Build the Flask application (see :func:`lagsight.app.create_app`)."""
    from .app import create_app as _create_app

    return _create_app(config)


__all__ = ["create_app", "__version__"]
