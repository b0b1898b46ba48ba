"""The layering rules of DEVELOPERS.md, checked so they stay true."""

from __future__ import annotations

import ast
import subprocess
import sys
from pathlib import Path

PKG = Path(__file__).resolve().parent.parent / "labelstudy"


def imported_modules(path: Path) -> set[str]:
    tree = ast.parse(path.read_text(encoding="utf-8"))
    names = set()
    for node in ast.walk(tree):
        if isinstance(node, ast.Import):
            names.update(a.name.split(".")[0] for a in node.names)
        elif isinstance(node, ast.ImportFrom) and node.module and node.level == 0:
            names.add(node.module.split(".")[0])
    return names


def test_only_the_store_speaks_sql():
    users = sorted(str(p.relative_to(PKG)) for p in PKG.rglob("*.py") if "sqlite3" in imported_modules(p))
    assert users == ["store.py"], users


def test_flask_only_in_the_web_layer():
    for p in PKG.rglob("*.py"):
        rel = p.relative_to(PKG).as_posix()
        if rel.startswith(("web/", "cli/")):
            continue
        assert not {"flask", "flask_wtf", "werkzeug"} & imported_modules(p) or rel == "project.py", rel


def test_statistics_core_is_pure():
    code = ("import sys, labelstudy.agreement; "
            "bad = [m for m in sys.modules if m.split('.')[0] in "
            "('flask', 'sqlite3', '_sqlite3', 'werkzeug', 'sklearn', 'statsmodels', 'labelstudy.store')]; "
            "print(bad); sys.exit(1 if bad else 0)")
    proc = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True)
    assert proc.returncode == 0, proc.stdout + proc.stderr


def test_every_public_statistic_names_its_source():
    import labelstudy.agreement as agreement
    for name in agreement.__all__:
        obj = getattr(agreement, name)
        if callable(obj) and not isinstance(obj, type) and name[0].islower() and \
                name not in ("as_matrix", "from_long", "resolve_domain"):
            doc = obj.__doc__ or ""
            assert any(ch.isdigit() for ch in doc) and len(doc) > 200, f"{name}: docstring lacks its source"
