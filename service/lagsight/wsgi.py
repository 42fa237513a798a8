"""gunicorn entry point: ``gunicorn lagsight.wsgi:app``."""
from . import create_app

app = create_app()
