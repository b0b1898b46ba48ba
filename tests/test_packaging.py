"""Templates are found both from the source checkout and from an installed wheel."""

from __future__ import annotations

import subprocess
import sys
import textwrap
import zipfile
from pathlib import Path

import pytest

from labelstudy.web import template_folder

ROOT = Path(__file__).resolve().parent.parent


def test_checkout_uses_top_level_templates():
    assert template_folder() == ROOT / "templates"
    assert (template_folder() / "base.html").is_file()


@pytest.fixture(scope="module")
def wheel(tmp_path_factory):
    out = tmp_path_factory.mktemp("wheel")
    build = tmp_path_factory.mktemp("buildtree")
    # build from a copy so the checkout's build/ and egg-info are never touched
    import shutil
    for name in ("pyproject.toml", "setup.py", "README.md", "labelstudy", "templates"):
        src = ROOT / name
        if src.is_dir():
            shutil.copytree(src, build / name, ignore=shutil.ignore_patterns("__pycache__", "*.pyc"))
        elif src.exists():
            shutil.copy(src, build / name)
    proc = subprocess.run([sys.executable, "-m", "build", "--wheel", "--no-isolation", "--outdir", str(out),
                           str(build)], capture_output=True, text=True)
    assert proc.returncode == 0, proc.stdout[-3000:] + proc.stderr[-3000:]
    (whl,) = out.glob("labelstudy-*.whl")
    return whl


def test_wheel_contains_templates_migrations_and_static(wheel):
    names = set(zipfile.ZipFile(wheel).namelist())
    assert "labelstudy/templates/base.html" in names
    assert "labelstudy/templates/auth/login.html" in names
    assert "labelstudy/migrations/001_initial.sql" in names
    tops = {n for n in (ROOT / "templates").rglob("*.html")}
    for t in tops:
        assert "labelstudy/templates/" + t.relative_to(ROOT / "templates").as_posix() in names


def test_installed_wheel_serves_its_own_templates(wheel, tmp_path):
    target = tmp_path / "site"
    zipfile.ZipFile(wheel).extractall(target)
    script = textwrap.dedent(f"""
        import sys
        sys.path.insert(0, {str(target)!r})
        import labelstudy, labelstudy.web
        assert labelstudy.__file__.startswith({str(target)!r}), labelstudy.__file__
        from labelstudy.web import create_app, template_folder
        from labelstudy.project import init_project
        assert str(template_folder()).startswith({str(target)!r}), template_folder()
        init_project({str(tmp_path / 'proj')!r}, password='a long password')
        app = create_app({str(tmp_path / 'proj')!r})
        resp = app.test_client().get('/r/login')
        assert resp.status_code == 200, resp.status_code
        assert b'Researcher login' in resp.data
        print('OK')
    """)
    proc = subprocess.run([sys.executable, "-c", script], capture_output=True, text=True, cwd=tmp_path)
    assert proc.returncode == 0 and "OK" in proc.stdout, proc.stderr[-3000:]
