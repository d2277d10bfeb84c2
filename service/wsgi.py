"""WSGI entry point for gunicorn: ``service.wsgi:app``.

A bad setting stops start-up with the message alone (no traceback) and exit status 1.
"""

from service import create_app
from service.settings import SettingsError

try:
    app = create_app()
except SettingsError as exc:
    raise SystemExit(f"attribute sampling service: {exc}") from None
