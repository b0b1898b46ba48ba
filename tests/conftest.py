"""Shared fixtures: a fresh project folder per test, with the real SQLite file on disk."""

from __future__ import annotations

import pytest

from labelstudy.project import init_project

PASSWORD = "correct horse battery"


@pytest.fixture
def project(tmp_path):
    proj, _ = init_project(tmp_path / "project", password=PASSWORD)
    return proj


@pytest.fixture
def store(project):
    s = project.store()
    yield s
    s.close()
