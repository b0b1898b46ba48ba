"""Readers from bytes to :class:`RawTable`: delimited text (CSV/TSV) and XLSX workbooks.

Formulas are never evaluated: workbooks are opened with ``openpyxl.load_workbook(read_only=True,
data_only=True)``, which gives the value a spreadsheet program saved with the file (or nothing when a
formula was never calculated); a text cell that starts with ``=`` stays text.
"""

from __future__ import annotations

import csv
import io
import warnings
import zipfile

from labelstudy.errors import SolutionImportError
from labelstudy.solution._cells import RawTable

__all__ = ["decode_text", "read_delimited", "read_workbook", "MAX_ROWS", "MAX_COLUMNS"]

MAX_ROWS = 100_000
MAX_COLUMNS = 2_000
_DELIMITERS = (",", ";", "\t")


def decode_text(data: bytes, file: str) -> tuple[str, str | None]:
    """Decode a text file: UTF-8 (a byte-order mark is dropped), UTF-16 with a byte-order mark, else
    Windows-1252 with a note. Returns ``(text, note)``."""
    if data[:2] in (b"\xff\xfe", b"\xfe\xff"):
        try:
            return data.decode("utf-16"), None
        except UnicodeDecodeError:
            raise SolutionImportError("the file starts like UTF-16 text but cannot be decoded as such",
                                      file=file) from None
    if b"\x00" in data:
        raise SolutionImportError("this is not a text file (it holds binary data); save the table as "
                                  "CSV (UTF-8) or as an .xlsx workbook", file=file)
    try:
        return data.decode("utf-8-sig"), None
    except UnicodeDecodeError:
        pass
    try:
        text = data.decode("cp1252")
    except UnicodeDecodeError:
        raise SolutionImportError("the file is neither UTF-8 nor Windows-1252 text; save it as "
                                  "CSV (UTF-8)", file=file) from None
    return text, (f"{file}: not UTF-8, read as Windows-1252; check accented characters in item texts")


def _records(text: str, delimiter: str):
    reader = csv.reader(io.StringIO(text, newline=""), delimiter=delimiter, strict=False)
    for n, rec in enumerate(reader, start=1):
        if n > MAX_ROWS:
            raise OverflowError
        yield n, rec


def sniff_delimiter(text: str, preferred: str | None = None) -> str:
    """Pick the delimiter among ``,`` ``;`` and tab: the one that splits the header into the most columns
    while most rows have the same number of fields as the header. ``preferred`` breaks ties."""
    lines = [ln for ln in text.splitlines() if ln.strip()][:50]
    best, best_score = preferred or ",", None
    for d in _DELIMITERS:
        try:
            recs = [r for _, r in _records("\n".join(lines), d) if any(c.strip() for c in r)]
        except (csv.Error, OverflowError):
            continue
        if not recs:
            continue
        width = len(recs[0])
        if width < 2:
            continue
        consistent = sum(1 for r in recs if len(r) == width) / len(recs)
        score = (round(consistent, 6), width, d == preferred)
        if best_score is None or score > best_score:
            best, best_score = d, score
    return best


def read_delimited(data: bytes, file: str, *, preferred: str | None = None) -> tuple[RawTable, list[str]]:
    """Read a CSV/TSV table from bytes. Returns the table and notes (encoding fall-back)."""
    if not data.strip():
        raise SolutionImportError("the file is empty", file=file)
    text, note = decode_text(data, file)
    if not text.strip():
        raise SolutionImportError("the file is empty", file=file)
    delimiter = sniff_delimiter(text, preferred)
    try:
        rows = list(_records(text, delimiter))
    except csv.Error as e:
        raise SolutionImportError(f"the file cannot be read as a delimited table ({e})", file=file) from None
    except OverflowError:
        raise SolutionImportError(f"the table has more than {MAX_ROWS} rows; this is not a factor "
                                  "solution", file=file) from None
    if any(len(r) > MAX_COLUMNS for _, r in rows):
        raise SolutionImportError(f"the table has more than {MAX_COLUMNS} columns", file=file)
    hint = (" (numbers with a decimal comma need columns separated by ';')" if delimiter == "," else "")
    table = RawTable.from_rows(file, rows, decimal_comma=delimiter in (";", "\t"), overflow_hint=hint)
    return table, [note] if note else []


MAX_UNZIPPED_BYTES = 50 * 2**20   # an EFA solution workbook unpacks to well under 1 MB
MAX_ZIP_MEMBERS = 1_000


def _check_archive(data: bytes, file: str) -> None:
    """Refuse archives that would unpack to more than MAX_UNZIPPED_BYTES (a "zip bomb") before reading them.

    The sizes are the ones the archive declares; Python's zipfile never inflates a member past its
    declared size (and checks its CRC), so the sum bounds what openpyxl can make us decompress.
    """
    try:
        with zipfile.ZipFile(io.BytesIO(data)) as zf:
            infos = zf.infolist()
    except (zipfile.BadZipFile, OSError, ValueError, EOFError):
        raise SolutionImportError("this .xlsx workbook is damaged (its zip archive cannot be read)",
                                  file=file) from None
    if len(infos) > MAX_ZIP_MEMBERS:
        raise SolutionImportError(f"this .xlsx archive holds {len(infos)} files; a workbook has far fewer, "
                                  "so it was not opened", file=file)
    total = sum(max(i.file_size, 0) for i in infos)
    if total > MAX_UNZIPPED_BYTES:
        raise SolutionImportError(f"this .xlsx workbook would unpack to {total // 2**20} MB (the limit is "
                                  f"{MAX_UNZIPPED_BYTES // 2**20} MB), so it was not opened", file=file)


def _open_workbook(data: bytes, file: str):
    import openpyxl

    if not zipfile.is_zipfile(io.BytesIO(data)):
        raise SolutionImportError("this is not a valid .xlsx workbook (not a zip archive); save the file "
                                  "from your spreadsheet program as Excel Workbook (.xlsx)", file=file)
    _check_archive(data, file)
    try:
        return openpyxl.load_workbook(io.BytesIO(data), read_only=True, data_only=True)
    except Exception as e:  # openpyxl raises many types on damaged archives; each means the same here
        raise SolutionImportError(f"this .xlsx workbook is damaged or not a workbook "
                                  f"({type(e).__name__})", file=file) from None


def _sheet_rows(ws, file: str):
    try:
        ws.reset_dimensions()
    except AttributeError:
        pass
    rows = []
    try:
        for n, row in enumerate(ws.iter_rows(values_only=True), start=1):
            if n > MAX_ROWS:
                raise SolutionImportError(f"the sheet has more than {MAX_ROWS} rows; this is not a "
                                          "factor solution", file=file)
            if len(row) > MAX_COLUMNS:
                raise SolutionImportError(f"the sheet has more than {MAX_COLUMNS} columns", file=file)
            rows.append((n, tuple(row)))
    except SolutionImportError:
        raise
    except Exception as e:  # damaged sheet XML, bad shared strings, ...
        raise SolutionImportError(f"this .xlsx workbook is damaged: a sheet cannot be read "
                                  f"({type(e).__name__})", file=file) from None
    return rows


def read_workbook(data: bytes, file: str) -> dict[str, RawTable | None]:
    """Read the sheets of a workbook into tables keyed ``items``, ``factors``, ``phi``, ``meta``.

    Sheets are matched by name (case and surrounding spaces ignored; ``loadings`` also names the items
    sheet). With one sheet, or no sheet named items, the first sheet is the items table. Missing tables are
    ``None``. Text cells may use a decimal comma.
    """
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")  # openpyxl warns about styles, extensions, odd relationships
        return _read_workbook(data, file)


def _read_workbook(data: bytes, file: str) -> dict[str, RawTable | None]:
    wb = _open_workbook(data, file)
    try:
        try:
            sheets = list(wb.worksheets)
        except Exception as e:
            raise SolutionImportError(f"this .xlsx workbook is damaged ({type(e).__name__})",
                                      file=file) from None
        if not sheets:
            raise SolutionImportError("the workbook has no sheets", file=file)
        by_name: dict[str, object] = {}
        for ws in sheets:
            by_name.setdefault(str(ws.title).strip().lower(), ws)
        chosen = {"items": by_name.get("items") or by_name.get("loadings") or sheets[0]}
        for key in ("factors", "phi", "meta"):
            ws = by_name.get(key)
            chosen[key] = ws if ws is not None and ws is not chosen["items"] else None
        out: dict[str, RawTable | None] = {}
        for key, ws in chosen.items():
            if ws is None:
                out[key] = None
                continue
            where = f"{file} (sheet {ws.title!r})" if len(sheets) > 1 else file
            rows = _sheet_rows(ws, where)
            if key != "items" and not any(any(c is not None and str(c).strip() for c in r) for _, r in rows):
                out[key] = None  # an empty optional sheet is the same as no sheet
                continue
            out[key] = RawTable.from_rows(where, rows, decimal_comma=True)
        return out
    finally:
        try:
            wb.close()
        except Exception:
            pass
