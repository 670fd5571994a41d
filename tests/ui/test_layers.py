"""The pages read and write only through domain functions: no module of ``service/ui`` queries
the store itself (no SQLAlchemy, no session or read of the store, nothing from ``service.store``
but its named constants)."""

from __future__ import annotations

import ast
from pathlib import Path

UI_DIR = Path(__file__).resolve().parents[2] / "service" / "ui"


def store_access(source: str) -> list[str]:
    """What in ``source`` reaches the store directly, one line per finding."""
    found = []
    for node in ast.walk(ast.parse(source)):
        if isinstance(node, ast.Import):
            found += [f"import {a.name}" for a in node.names if a.name.startswith("sqlalchemy")]
        elif isinstance(node, ast.ImportFrom) and node.module:
            if node.module.startswith("sqlalchemy"):
                found.append(f"from {node.module}")
            elif node.module.startswith("service.store"):
                found += [f"from {node.module} import {a.name}" for a in node.names
                          if not a.name.isupper()]
        elif isinstance(node, ast.Attribute) and node.attr in ("transaction", "read", "execute"):
            found.append(f".{node.attr}")
    return found


def test_no_page_module_queries_the_store():
    findings = {path.name: found for path in sorted(UI_DIR.glob("*.py"))
                if (found := store_access(path.read_text(encoding="utf-8")))}
    assert findings == {}


def test_the_scan_finds_a_page_that_queries_the_store():
    page = ("from sqlalchemy import select\nfrom service.store.models import Run, RUN_STATES\n"
            "def view(store):\n    with store.transaction() as s:\n"
            "        return s.execute(select(Run))\n")
    assert store_access(page) == ["from sqlalchemy", "from service.store.models import Run",
                                  ".transaction", ".execute"]
    assert store_access("from service.store.models import RUN_STATES\n") == []
