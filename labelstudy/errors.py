"""The project's own exceptions.

Every error a user can cause (a bad file, a bad form, a stale edit, a wrong command) is one of these, with a
message written for a person: what is wrong and where. The CLI prints ``str(error)`` on one line and exits
non-zero; the web layer shows it on the page. Anything else escaping is a bug.
"""

from __future__ import annotations


class LabelstudyError(Exception):
    """Base of every error labelstudy raises on purpose."""


class SolutionImportError(LabelstudyError):
    """An EFA-solution file cannot be read. The message names the file, and the row and column where known."""

    def __init__(self, message: str, *, file: str | None = None, row: int | None = None,
                 column: str | None = None):
        self.file, self.row, self.column = file, row, column
        where = []
        if file:
            where.append(str(file))
        if row is not None:
            where.append(f"row {row}")
        if column is not None:
            where.append(f"column {column!r}")
        super().__init__(f"{', '.join(where)}: {message}" if where else message)
        self.reason = message


class StoreError(LabelstudyError):
    """The project database cannot do what was asked (missing record, wrong state, unreadable file)."""


class SchemaTooNewError(StoreError):
    """The database was written by a newer labelstudy than this one."""


class StaleRevisionError(StoreError):
    """An edit was based on an older version than the one stored; nothing was changed."""


class StorageUnavailableError(StoreError):
    """The database file cannot be written just now (disk full, read-only, locked too long).

    Nothing was committed; the caller may retry later.
    """


class NotFoundError(StoreError):
    """A study, round, judge or item that does not exist was asked for."""


class StateError(StoreError):
    """The action is not allowed in the record's current state (a closed round, a revoked link...)."""


class ProjectError(LabelstudyError):
    """A project folder is missing, incomplete or already initialised."""


class FormInputError(LabelstudyError):
    """A submitted form or request body is not valid; the message says which field and why."""
