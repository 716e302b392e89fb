"""Process concerns: the ASGI entry point, the gunicorn worker, draining, JSON logs and metrics files."""
