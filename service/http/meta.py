"""Service endpoints: ``GET /v1/health``, ``GET /v1/ready``, ``GET /openapi.yaml`` and ``.json``."""

from __future__ import annotations

import yaml
from flask import Blueprint, Response, current_app

from service.version import VERSION
from service.web import jsonio

bp = Blueprint("meta", __name__)


@bp.get("/v1/health")
def health() -> Response:
    """Liveness and version."""
    return current_app.response_class(
        jsonio.dumps({"status": "ok", "version": VERSION}), mimetype="application/json"
    )


@bp.get("/v1/ready")
def ready() -> Response:
    """Readiness: 200 once the application is built and can answer requests, else 503."""
    if not current_app.config.get("READY"):
        return current_app.response_class(
            jsonio.dumps({"status": "starting"}), status=503, mimetype="application/json"
        )
    return current_app.response_class(
        jsonio.dumps({"status": "ready"}), mimetype="application/json"
    )


@bp.get("/openapi.yaml")
def openapi_document() -> Response:
    """The OpenAPI 3.1 contract, generated from the schemas at start-up."""
    return current_app.response_class(
        current_app.config["OPENAPI_YAML"], mimetype="application/yaml"
    )


@bp.get("/openapi.json")
def openapi_json() -> Response:
    """The same OpenAPI 3.1 contract as JSON, for browsers and tools that do not read YAML.

    Made from the YAML on the first request and kept: parsing it costs more than building
    the application, and most processes (and tests) never ask for it.
    """
    config = current_app.config
    if "OPENAPI_JSON" not in config:
        config["OPENAPI_JSON"] = jsonio.dumps(yaml.safe_load(config["OPENAPI_YAML"]))
    return current_app.response_class(config["OPENAPI_JSON"], mimetype="application/json")
