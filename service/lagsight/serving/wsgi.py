"""gunicorn entry point: ``gunicorn lagsight.serving.wsgi:app``."""
from lagsight import create_app

app = create_app()
