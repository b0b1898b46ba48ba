"""A project folder: the database, the researcher password and the secret key, side by side.

Layout of ``PROJECT_DIR``::

    labelstudy.sqlite   the study store (see labelstudy.store)
    secret_key          random key signing sessions and CSRF tokens, file mode 0600
    rules.json          the decision rules used by reports (written on first use, editable)

The researcher password is stored only as a salted hash (werkzeug's scrypt/pbkdf2) in the database.
"""

from __future__ import annotations

import os
import secrets
from dataclasses import dataclass
from pathlib import Path

from werkzeug.security import check_password_hash, generate_password_hash

from labelstudy.errors import ProjectError
from labelstudy.store import DB_NAME, Store

SECRET_NAME = "secret_key"


@dataclass(frozen=True)
class Project:
    path: Path

    @property
    def db_path(self) -> Path:
        return self.path / DB_NAME

    @property
    def secret_path(self) -> Path:
        return self.path / SECRET_NAME

    @property
    def rules_path(self) -> Path:
        return self.path / "rules.json"

    def store(self) -> Store:
        return Store(self.db_path, create=False)

    def secret_key(self) -> bytes:
        try:
            return bytes.fromhex(self.secret_path.read_text().strip())
        except (OSError, ValueError) as exc:
            raise ProjectError(f"{self.secret_path}: cannot read the project's secret key ({exc})") from None

    def check_password(self, password: str) -> bool:
        stored = self.store().get_setting("researcher_password_hash")
        return bool(stored) and check_password_hash(stored, password or "")


def open_project(path: str | os.PathLike) -> Project:
    """Open an initialised project folder, or raise ProjectError saying what is missing."""
    p = Path(path)
    if not p.is_dir():
        raise ProjectError(f"{p} is not a project folder (run `labelstudy init {p}` first)")
    if not (p / DB_NAME).exists():
        raise ProjectError(f"{p} has no {DB_NAME}; run `labelstudy init {p}` to create the project")
    if not (p / SECRET_NAME).exists():
        raise ProjectError(f"{p} has no {SECRET_NAME} file; the project is incomplete")
    project = Project(p)
    project.store()  # migrates an older schema, refuses a newer one
    return project


def init_project(path: str | os.PathLike, *, password: str | None = None) -> tuple[Project, str]:
    """Create a project folder with its database, secret key (mode 0600) and researcher password.

    Refuses a folder that already holds a project: initialising twice must never wipe answers.
    Returns the project and the password (generated when not given) so it can be shown once.
    """
    p = Path(path)
    if (p / DB_NAME).exists() or (p / SECRET_NAME).exists():
        raise ProjectError(f"{p} already holds a labelstudy project; nothing was changed")
    p.mkdir(parents=True, exist_ok=True)
    secret = p / SECRET_NAME
    fd = os.open(secret, os.O_WRONLY | os.O_CREAT | os.O_EXCL, 0o600)
    with os.fdopen(fd, "w") as fh:
        fh.write(secrets.token_hex(32) + "\n")
    os.chmod(secret, 0o600)
    password = password or secrets.token_urlsafe(12)
    store = Store(p / DB_NAME)
    store.set_setting("researcher_password_hash", generate_password_hash(password))
    store.log_event("project_created")
    return Project(p), password


def set_password(project: Project, password: str) -> None:
    if len(password or "") < 8:
        raise ProjectError("the researcher password needs at least 8 characters")
    project.store().set_setting("researcher_password_hash", generate_password_hash(password))
