"""Provenance of a check record: what computed it, where and when."""

from __future__ import annotations

import datetime as _dt
import os
import platform
import socket
import sys
from functools import lru_cache
from importlib import metadata

SCHEMA_VERSION = 1


def _version(distribution: str) -> str:
    try:
        return metadata.version(distribution)
    except metadata.PackageNotFoundError:
        return "not installed"


@lru_cache(maxsize=1)
def _static_provenance() -> dict[str, str | int]:
    return {
        "engine_version": _version("fluxproof"),
        "schema_version": SCHEMA_VERSION,
        "python": platform.python_version(),
        "numpy": _version("numpy"),
        "scipy": _version("scipy"),
        "pint": _version("pint"),
        "marshmallow": _version("marshmallow"),
        "platform": f"{platform.system()} {platform.release()} {platform.machine()}",
        "implementation": sys.implementation.name,
    }


def utc_now() -> str:
    """Current time, ISO 8601 in UTC with microseconds."""
    return _dt.datetime.now(_dt.UTC).isoformat(timespec="microseconds")


def provenance_block(case_sha256: str, started_at: str, finished_at: str) -> dict:
    """The record's ``provenance`` object (README, "What the record means"), with the case
    digest."""
    block: dict = dict(_static_provenance())
    block.update(
        worker=f"{socket.gethostname()}:{os.getpid()}",
        started_at=started_at,
        finished_at=finished_at,
        case_sha256=case_sha256,
    )
    return block
