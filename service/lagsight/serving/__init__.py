"""Running the service: the ``lagsight`` command, the gunicorn settings and WSGI entry point
(``gunicorn -c python:lagsight.serving.gunicorn_conf lagsight.serving.wsgi:app``), worker memory handling and
gunicorn's own error answers. The top of the flow: it may import everything, and nothing imports it.
"""
