"""The ASGI entry point for gunicorn: the app built from the environment's settings."""

from service.api import create_app
from service.settings import Settings

app = create_app(Settings.from_env())
