"""No function-local import of a project module in ``service``, ``worker`` or ``schemas``.

An import inside a function body that names ``service``, ``worker`` or ``schemas`` (or is
relative) usually dodges an import cycle between the layers. Only the documented plugin
boundaries below may import at call time.
"""

from __future__ import annotations

import ast
from pathlib import Path

REPO_ROOT = Path(__file__).resolve().parents[2]
PROJECT_PACKAGES = ("service", "worker", "schemas")

#: (file, function) pairs that may import a project module when called, and why.
ALLOWED = {
    # The command line's lazy group imports each subcommand's module on first use.
    ("service/cli.py", "LazyGroup._load"),
    # The engine's plugin boundary: ``worker.engine.check_case`` resolves (module ``__getattr__``)
    # to ``schemas.checking.check_case`` when first used; the engine itself never loads schemas.
    ("worker/engine/__init__.py", "__getattr__"),
}


def _project_import(node: ast.Import | ast.ImportFrom) -> str | None:
    """The project module a node imports, or None for a third-party or standard module."""
    if isinstance(node, ast.ImportFrom):
        if node.level:
            return "." * node.level + (node.module or "")
        names = [node.module or ""]
    else:
        names = [alias.name for alias in node.names]
    for name in names:
        if name.partition(".")[0] in PROJECT_PACKAGES:
            return name
    return None


def local_imports(source: str, path: str) -> list[str]:
    """``path:line function -> module`` for each function-local project import not allowed."""
    found: list[str] = []

    def visit(node: ast.AST, scope: list[str], in_function: bool) -> None:
        for child in ast.iter_child_nodes(node):
            if isinstance(child, (ast.FunctionDef, ast.AsyncFunctionDef, ast.ClassDef)):
                visit(child, [*scope, child.name],
                      in_function or not isinstance(child, ast.ClassDef))
            elif isinstance(child, (ast.Import, ast.ImportFrom)) and in_function:
                module = _project_import(child)
                qualname = ".".join(scope)
                if module and (path, qualname) not in ALLOWED:
                    found.append(f"{path}:{child.lineno} {qualname} -> {module}")
            else:
                visit(child, scope, in_function)

    visit(ast.parse(source, filename=path), [], False)
    return found


def _project_files() -> list[Path]:
    return sorted(p for package in PROJECT_PACKAGES for p in (REPO_ROOT / package).rglob("*.py"))


def test_the_scan_finds_local_imports_and_spares_the_allowed_ones():
    source = (
        "import service.app\n"
        "from worker.engine import model\n"
        "import numpy\n"
        "def solve():\n"
        "    import numpy as np\n"
        "    from schemas import CaseError\n"
        "    return np\n"
        "class Group:\n"
        "    def _load(self):\n"
        "        from . import cli_check\n"
        "        def inner():\n"
        "            import worker.tasks\n"
    )
    assert local_imports(source, "service/x.py") == [
        "service/x.py:6 solve -> schemas",
        "service/x.py:10 Group._load -> .",
        "service/x.py:12 Group._load.inner -> worker.tasks",
    ]
    allowed = "def __getattr__(name):\n    from schemas.checking import check_case\n"
    assert local_imports(allowed, "worker/engine/__init__.py") == []
    assert local_imports(allowed, "worker/engine/other.py") == [
        "worker/engine/other.py:2 __getattr__ -> schemas.checking"]


def test_every_allowed_boundary_exists():
    for path, qualname in ALLOWED:
        tree = ast.parse((REPO_ROOT / path).read_text(encoding="utf-8"))
        names = {node.name for node in ast.walk(tree)
                 if isinstance(node, (ast.FunctionDef, ast.AsyncFunctionDef, ast.ClassDef))}
        assert set(qualname.split(".")) <= names, (path, qualname)


def test_no_function_local_import_of_a_project_module():
    found = [hit for path in _project_files()
             for hit in local_imports(path.read_text(encoding="utf-8"),
                                      path.relative_to(REPO_ROOT).as_posix())]
    assert not found, f"{len(found)} function-local project imports:\n" + "\n".join(found)
