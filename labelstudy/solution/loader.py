"""Entry points: :func:`load_solution` (paths) and :func:`read_solution_bytes` (uploads)."""

from __future__ import annotations

from pathlib import Path

from labelstudy.errors import SolutionImportError
from labelstudy.solution._build import (assemble, factors_from_table, items_from_table, meta_from_table,
                                        phi_from_table)
from labelstudy.solution._json import read_json
from labelstudy.solution._readers import read_delimited, read_workbook
from labelstudy.solution.model import Solution

__all__ = ["load_solution", "read_solution_bytes", "MAX_UPLOAD_BYTES"]

MAX_UPLOAD_BYTES = 20 * 1024 * 1024
_TEXT = {".csv": ",", ".tsv": "\t", ".txt": None, ".tab": "\t"}
_BOOK = {".xlsx", ".xlsm"}
_KNOWN = "an .xlsx workbook, a .json file, or .csv/.tsv tables"


def _kind(name: str) -> str:
    ext = Path(name).suffix.lower()
    if ext in _BOOK:
        return "xlsx"
    if ext == ".json":
        return "json"
    if ext in _TEXT:
        return "text"
    if ext == ".xls":
        raise SolutionImportError("old binary Excel files (.xls) are not read; save the workbook as "
                                  "Excel Workbook (.xlsx)", file=name)
    if ext == ".ods":
        raise SolutionImportError("OpenDocument spreadsheets (.ods) are not read; save as .xlsx or CSV",
                                  file=name)
    raise SolutionImportError(f"unknown file type {ext or '(no extension)'!r}: give {_KNOWN}", file=name)


def _read_bytes(path: Path) -> bytes:
    try:
        size = path.stat().st_size
        if size > MAX_UPLOAD_BYTES:
            raise SolutionImportError(f"the file is larger than {MAX_UPLOAD_BYTES // 2**20} MB; this is not "
                                      "a factor solution", file=str(path))
        return path.read_bytes()
    except FileNotFoundError:
        raise SolutionImportError("no such file", file=str(path)) from None
    except IsADirectoryError:
        raise SolutionImportError("this is a folder, not a file", file=str(path)) from None
    except OSError as e:
        raise SolutionImportError(f"the file cannot be read ({e.strerror or e})", file=str(path)) from None


def _side_table(path: Path, role: str):
    """Read a factors/phi/meta table from its own file (CSV/TSV, or a workbook's sheet of that name or
    its first sheet)."""
    kind = _kind(str(path))
    data = _read_bytes(path)
    if kind == "text":
        table, notes = read_delimited(data, str(path), preferred=_TEXT[path.suffix.lower()])
        return table, notes
    if kind == "xlsx":
        tables = read_workbook(data, str(path))
        return (tables.get(role) or tables["items"]), []
    raise SolutionImportError(f"a {role} table must be a .csv, .tsv or .xlsx file", file=str(path))


def _from_tables(items, factors, phi, meta, *, source: str, notes: list[str], require_text: bool,
                 workbook: bool) -> Solution:
    part = items_from_table(items, require_text=require_text, workbook=workbook)
    fac, fac_file = None, None
    if factors is not None:
        fac, more = factors_from_table(factors)
        notes = notes + more
        fac_file = factors.file
    phi_part = phi_from_table(phi) if phi is not None else None
    meta_d = meta_from_table(meta) if meta is not None else {}
    return assemble(part, fac, fac_file, phi_part, meta_d, source, notes)


def read_solution_bytes(data: bytes, filename: str, *, require_text: bool = True) -> Solution:
    """Read an uploaded solution: an .xlsx workbook, a .json file, or a single CSV/TSV items table.

    Parameters
    ----------
    data : bytes
        The file's content.
    filename : str
        The upload's name; its extension chooses the reader and it names the file in messages.
    require_text : bool
        Refuse a table without an item text column (``True``, for building a study), or let the item ids
        stand in with a note (``False``, for ``solution check``).

    Raises
    ------
    SolutionImportError
        For every problem with the file, naming file, row and column where there are some.
    """
    name = Path(str(filename)).name or "upload"
    kind = _kind(name)
    if len(data) > MAX_UPLOAD_BYTES:
        raise SolutionImportError(f"the file is larger than {MAX_UPLOAD_BYTES // 2**20} MB", file=name)
    return _parse(data, kind, name, require_text)


def _parse(data: bytes, kind: str, name: str, require_text: bool) -> Solution:
    if not data.strip():
        raise SolutionImportError("the file is empty", file=name)
    if kind == "json":
        return read_json(data, name, require_text=require_text)
    if kind == "xlsx":
        t = read_workbook(data, name)
        return _from_tables(t["items"], t["factors"], t["phi"], t["meta"], source=name, notes=[],
                            require_text=require_text, workbook=True)
    table, notes = read_delimited(data, name, preferred=_TEXT[Path(name).suffix.lower()])
    return _from_tables(table, None, None, None, source=name, notes=notes, require_text=require_text,
                        workbook=False)


def _in_dir(folder: Path, role: str) -> Path | None:
    for ext in (".csv", ".tsv", ".txt"):
        p = folder / f"{role}{ext}"
        if p.is_file():
            return p
    return None


def _sibling(items: Path, role: str) -> Path | None:
    for ext in (".csv", ".tsv", ".txt"):
        p = items.with_name(f"{items.stem}.{role}{ext}")
        if p.is_file():
            return p
    return None


def load_solution(path, *, factors=None, phi=None, meta=None, require_text: bool = True) -> Solution:
    """Read an EFA solution from a file or folder.

    Parameters
    ----------
    path : str or Path
        An .xlsx workbook (sheets items, factors, phi, meta), a .json file, a CSV/TSV items table (the
        sibling files ``<stem>.factors.csv``, ``<stem>.phi.csv``, ``<stem>.meta.csv`` are picked up), or a
        folder holding ``items.csv``, ``factors.csv``, ``phi.csv``, ``meta.csv`` (or ``.tsv``).
    factors, phi, meta : str or Path, optional
        Explicit table files; they replace sibling files and workbook sheets.
    require_text : bool
        See :func:`read_solution_bytes`.

    Raises
    ------
    SolutionImportError
        For every problem with the files, naming file, row and column where there are some.
    """
    path = Path(path)
    explicit = {"factors": factors, "phi": phi, "meta": meta}
    notes: list[str] = []
    if path.is_dir():
        items_path = _in_dir(path, "items")
        if items_path is None:
            raise SolutionImportError("the folder holds no items.csv (or items.tsv)", file=str(path))
        side = {role: Path(explicit[role]) if explicit[role] else _in_dir(path, role) for role in explicit}
    else:
        kind = _kind(path.name)
        items_path = path
        if kind in ("json", "xlsx") and not any(explicit.values()):
            return _parse(_read_bytes(path), kind, str(path), require_text)
        if kind == "json":
            raise SolutionImportError("a JSON solution holds its factors, phi and meta itself; "
                                      "separate table files cannot be added to it", file=str(path))
        if kind == "xlsx":
            book = read_workbook(_read_bytes(path), str(path))
            tables = {role: (_side_table(Path(explicit[role]), role)[0] if explicit[role] else book[role])
                      for role in explicit}
            return _from_tables(book["items"], tables["factors"], tables["phi"], tables["meta"],
                                source=str(path), notes=notes, require_text=require_text, workbook=True)
        side = {role: Path(explicit[role]) if explicit[role] else _sibling(path, role) for role in explicit}
        for role, p in side.items():
            if p is not None and not explicit[role]:
                notes.append(f"{role} read from {p.name}")
    items, more = read_delimited(_read_bytes(items_path), str(items_path),
                                 preferred=_TEXT.get(items_path.suffix.lower()))
    notes += more
    tables = {}
    for role, p in side.items():
        if p is None:
            tables[role] = None
            continue
        tables[role], more = _side_table(p, role)
        notes += more
    return _from_tables(items, tables["factors"], tables["phi"], tables["meta"], source=str(path),
                        notes=notes, require_text=require_text, workbook=False)
