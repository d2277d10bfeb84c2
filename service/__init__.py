"""Attribute-sampling service: the app factory.

``create_app()`` builds the Flask application: settings from the environment,
strict JSON, request ids, security headers and JSON log lines
(:mod:`service.context`), the problem-details error handler, and one blueprint per
resource. The sampling mathematics lives in :mod:`service.sampling` and knows
nothing of HTTP.
"""

from __future__ import annotations

from flask import Flask

from service import context, problems
from service.http import RESOURCES, meta
from service.settings import Settings


def create_app(settings: Settings | None = None) -> Flask:
    """Build the application; ``settings`` defaults to those read from the environment."""
    from service.openapi import build_yaml

    settings = settings or Settings.from_environ()
    app = Flask(__name__)
    app.config.update(
        SETTINGS=settings,
        MAX_CONTENT_LENGTH=settings.max_body_bytes,
        OPENAPI_YAML=build_yaml(),
    )
    context.configure_logging()
    context.register(app)
    problems.register(app)
    app.register_blueprint(meta.bp)
    for module in RESOURCES:
        app.register_blueprint(module.bp)
    app.config["READY"] = True
    return app
