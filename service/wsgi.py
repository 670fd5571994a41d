"""WSGI entry point for production servers: ``gunicorn 'service.wsgi:app'``."""

from service.app import create_app

app = create_app()
