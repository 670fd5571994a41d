"""fluxproof service: Flask API, store, auth, sign-off, audit trail, run execution, batches."""

from __future__ import annotations

from importlib import metadata

try:
    __version__ = metadata.version("fluxproof")
except metadata.PackageNotFoundError:  # running from a source tree that is not installed
    __version__ = "0.1.0"
