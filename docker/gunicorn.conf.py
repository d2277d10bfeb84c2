"""gunicorn settings of the container and of ``make run``: see service/web/gunicorn_config.py."""

from service.web.gunicorn_config import *  # noqa: F403
