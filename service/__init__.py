"""Attribute-sampling service: the app factory.

``create_app()`` builds the Flask application: settings from the environment,
strict JSON, request ids, security headers and JSON log lines
(:mod:`service.web.context`), Prometheus metrics (:mod:`service.web.metrics`), optional API
keys (:mod:`service.web.access`), CORS when configured (:mod:`service.web.cors`), the
problem-details error handler, one blueprint per resource, and the web page and API
reference (:mod:`service.webpage`). The sampling
mathematics lives in :mod:`service.sampling` and knows nothing of HTTP.
"""

from __future__ import annotations

from typing import TYPE_CHECKING

if TYPE_CHECKING:
    from flask import Flask

    from service.settings import Settings


def create_app(settings: Settings | None = None) -> Flask:
    """Build the application; ``settings`` defaults to those read from the environment."""
    # Imported here, not at the top: importing the package must stay free of side
    # effects, because gunicorn loads ``service.web.gunicorn_config`` before the app, and that
    # module must export PROMETHEUS_MULTIPROC_DIR before the Prometheus client is first
    # imported (the client picks single- or multiprocess values at import).
    from flask import Flask

    from service import webpage
    from service.http import RESOURCES, all_operations, direct, meta
    from service.settings import Settings
    from service.web import access, context, cors, metrics, problems
    from service.web.openapi import build_yaml

    settings = settings or Settings.from_environ()
    app = Flask(__name__)
    app.config.update(
        SETTINGS=settings,
        MAX_CONTENT_LENGTH=settings.max_body_bytes,
        OPENAPI_YAML=build_yaml(),
    )
    context.configure_logging()
    # Order matters: the request id is chosen first, then the request counted, so that a
    # request refused for want of a key is logged and counted too.
    context.register(app)
    metrics.register(app)
    access.register(app, settings.key_digests)
    cors.register(app, settings.cors_origins)
    problems.register(app)
    app.register_blueprint(meta.bp)
    app.register_blueprint(webpage.bp)
    for module in RESOURCES:
        app.register_blueprint(module.bp)
    # The operations' usual requests are answered ahead of Flask (service.http.direct).
    app.wsgi_app = direct.serve(app.wsgi_app, all_operations(), settings)  # type: ignore[method-assign,assignment]
    app.config["READY"] = True
    return app
