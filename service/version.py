"""The service version, from the installed package metadata."""

from __future__ import annotations

from importlib import metadata

try:
    VERSION = metadata.version("attribute-sampling-service")
except metadata.PackageNotFoundError:  # running from a source tree that was never installed
    VERSION = "0.0.0+source"
