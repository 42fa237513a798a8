"""The HTTP face: Flask blueprints, request bodies and query parameters, security headers, request ids, logs, metrics.

The only stage that imports Flask. It may import every stage below it (pipeline, outputs, consult, inputs, engine)
and the shared modules (options, config, problems); nothing outside web/, app.py and serving/ imports web/.
"""
