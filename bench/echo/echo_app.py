"""A trivial Flask JSON echo app: the floor the service's request rate is compared with.

``POST /echo`` parses the JSON body and answers it back as JSON. It has none of the
service's validation, computation, headers, metrics or log line, so under the same gunicorn
settings it measures what the server, Flask and JSON cost on their own.
"""

from __future__ import annotations

from typing import Any

from flask import Flask, jsonify, request

app = Flask(__name__)


@app.post("/echo")
def echo() -> Any:
    return jsonify(request.get_json())
