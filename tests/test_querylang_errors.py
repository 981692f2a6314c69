"""The query language stands alone: no module of querylang/ imports engine/ (DEVELOPERS.md,
"the language knows the catalog only through a small interface"), checked on the source
with Python's own `ast` module, and its errors carry the caret place the CLI prints."""
from __future__ import annotations

import ast
from pathlib import Path

from engine.errors import StrataError as EngineError
from querylang.errors import StrataError

QUERYLANG = Path(__file__).resolve().parents[1] / "querylang"


def imported_modules(path: Path) -> set[str]:
    tree = ast.parse(path.read_text(encoding="utf-8"), str(path))
    out: set[str] = set()
    for node in ast.walk(tree):
        if isinstance(node, ast.Import):
            out |= {alias.name for alias in node.names}
        elif isinstance(node, ast.ImportFrom) and node.module:
            out.add(node.module)
    return out


def test_no_querylang_module_imports_engine():
    files = sorted(QUERYLANG.glob("*.py"))
    assert len(files) > 5
    offending = {f.name: sorted(m for m in imported_modules(f) if m == "engine" or m.startswith("engine."))
                 for f in files}
    assert {k: v for k, v in offending.items() if v} == {}


def test_the_engine_raises_the_same_error_class():
    assert EngineError is StrataError


def test_a_query_error_draws_the_caret_under_its_column():
    e = StrataError("unknown layer", query="find w = wrod", line=1, column=10)
    assert str(e).splitlines() == ["query line 1, column 10:", "  find w = wrod", "           ^", "unknown layer"]
