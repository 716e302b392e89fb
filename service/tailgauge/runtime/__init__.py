"""Process concerns below the HTTP layer: the gunicorn worker, draining, JSON logs and metrics files."""
