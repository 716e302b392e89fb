"""System tests: the real gunicorn server on 127.0.0.1 under load, faults and a real browser."""
