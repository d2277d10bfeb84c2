"""gunicorn configuration of the container and of ``make run``: see service/gunicorn_config.py."""

from service.gunicorn_config import *  # noqa: F403
