"""The ASGI entry point for gunicorn: the app built from the environment's settings."""

from tailgauge.api import create_app
from tailgauge.settings import Settings

app = create_app(Settings.from_env())
