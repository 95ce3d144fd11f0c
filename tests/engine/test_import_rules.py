"""The engine is pure: every module of server/engine imports only the standard library and
server.engine itself (DESIGN.md section 2; STYLE.md "a pure engine")."""

from __future__ import annotations

import ast
import sys
from pathlib import Path

ENGINE = Path(__file__).resolve().parents[2] / "server" / "engine"


def _outside_imports(path: Path) -> list[str]:
    tree = ast.parse(path.read_text(encoding="utf-8"), filename=str(path))
    bad: list[str] = []
    for node in ast.walk(tree):
        names: list[str] = []
        if not isinstance(node, ast.Import | ast.ImportFrom):
            continue
        if isinstance(node, ast.Import):
            names = [alias.name for alias in node.names]
        elif isinstance(node, ast.ImportFrom):
            if node.level > 0:
                continue  # relative: inside server.engine by construction
            names = [node.module or ""]
        for name in names:
            top = name.split(".")[0]
            if name == "server.engine" or name.startswith("server.engine."):
                continue
            if top == "__future__" or top in sys.stdlib_module_names:
                continue
            bad.append(f"{path.name}:{node.lineno} imports {name}")
    return bad


def test_engine_has_modules_to_check() -> None:
    assert len(list(ENGINE.glob("*.py"))) >= 5


def test_every_engine_module_imports_only_the_standard_library_and_the_engine() -> None:
    bad = [line for path in sorted(ENGINE.rglob("*.py")) for line in _outside_imports(path)]
    assert bad == []


def test_the_import_check_catches_an_outside_import(tmp_path: Path) -> None:
    probe = tmp_path / "probe.py"
    probe.write_text("import sqlmodel\nfrom server.db import tables\nimport math\n", encoding="utf-8")
    assert _outside_imports(probe) == ["probe.py:1 imports sqlmodel", "probe.py:2 imports server.db"]
