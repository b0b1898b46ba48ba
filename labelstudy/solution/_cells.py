"""Raw tables and cell parsing shared by every reader.

A reader turns a file into :class:`RawTable` objects: a header and data rows, each row carrying the row
number a person sees in a spreadsheet (header = row 1 when the table starts at the top; blank rows are
counted as they are in the file). Cells are ``str``, ``int``, ``float``, ``bool``, ``None`` or another
value from a workbook (dates); nothing is interpreted here beyond that.
"""

from __future__ import annotations

import datetime as _dt
import math
import re
from dataclasses import dataclass

from labelstudy.errors import SolutionImportError

__all__ = ["RawTable", "column_letter", "is_blank", "cell_text", "parse_number", "parse_flag"]

_NUMBER = re.compile(r"[+-]?(?:\d+(?:\.\d*)?|\.\d+)(?:[eE][+-]?\d+)?")
_TRUE = {"1", "yes", "y", "true", "t", "x"}
_FALSE = {"0", "no", "n", "false", "f", ""}
_SPREADSHEET_ERRORS = {"#DIV/0!", "#N/A", "#NAME?", "#NULL!", "#NUM!", "#REF!", "#VALUE!"}


@dataclass(frozen=True)
class RawTable:
    """One table as read from a file.

    Attributes
    ----------
    file : str
        How the table is named in messages (a path, an upload's name, ``"book.xlsx (sheet 'phi')"``).
    header : tuple of str
        Header cells, stripped; ``""`` for a blank header cell.
    header_row : int
        Spreadsheet row number of the header.
    rows : tuple of (int, tuple)
        ``(row_number, cells)`` for every non-blank data row, cells padded to the header width.
    decimal_comma : bool
        Whether text cells may write numbers with a decimal comma (``0,45``).
    """

    file: str
    header: tuple[str, ...]
    header_row: int
    rows: tuple[tuple[int, tuple[object, ...]], ...]
    decimal_comma: bool = False

    @classmethod
    def from_rows(cls, file: str, rows, *, decimal_comma: bool = False, overflow_hint: str = "") -> "RawTable":
        """Build a table from ``(row_number, cells)`` pairs: skip blank rows, find the header (the first
        non-blank row), strip text, drop columns that are blank from top to bottom, and refuse a value that
        sits beyond the last header cell."""
        cleaned = [(n, tuple(_strip(c) for c in cells)) for n, cells in rows]
        cleaned = [(n, cells) for n, cells in cleaned if not all(is_blank(c) for c in cells)]
        if not cleaned:
            raise SolutionImportError("the file is empty (no header, no rows)", file=file)
        header_row, header_cells = cleaned[0]
        body = cleaned[1:]
        width = max(len(c) for _, c in cleaned)
        keep = [j for j in range(width)
                if not is_blank(_at(header_cells, j)) or any(not is_blank(_at(c, j)) for _, c in body)]
        named = [j for j in keep if not is_blank(_at(header_cells, j))]
        last = named[-1] if named else -1
        for n, cells in body:
            for j in range(last + 1, len(cells)):
                if not is_blank(cells[j]):
                    raise SolutionImportError(
                        "a value stands to the right of the last column header: give the column a header "
                        "or delete the value" + overflow_hint, file=file, row=n, column=column_letter(j))
        keep = [j for j in keep if j <= last]
        header = tuple(cell_text(_at(header_cells, j)) for j in keep)
        data = tuple((n, tuple(_at(cells, j) for j in keep)) for n, cells in body)
        return cls(file, header, header_row, data, decimal_comma)

    def column_name(self, j: int) -> str:
        """The header of column ``j``, or its spreadsheet letter when the header is blank."""
        return self.header[j] or column_letter(j)

    def error(self, message: str, row: int | None = None, j: int | None = None) -> SolutionImportError:
        """A :class:`SolutionImportError` located in this table."""
        return SolutionImportError(message, file=self.file, row=row,
                                   column=None if j is None else self.column_name(j))


def _at(cells, j):
    return cells[j] if j < len(cells) else None


def _strip(cell):
    if isinstance(cell, str):
        s = cell.replace("\ufeff", "").strip()
        return s
    return cell


def column_letter(j: int) -> str:
    """Spreadsheet letter of the zero-based column ``j``.

    >>> column_letter(0), column_letter(25), column_letter(26)
    ('A', 'Z', 'AA')
    """
    s = ""
    j += 1
    while j:
        j, r = divmod(j - 1, 26)
        s = chr(65 + r) + s
    return s


def is_blank(cell) -> bool:
    """True for ``None`` and for text made only of white space."""
    return cell is None or (isinstance(cell, str) and not cell.strip())


def cell_text(cell) -> str:
    """A cell as text: whole-number floats without ``.0``, dates in ISO form, blank as ``""``.

    >>> cell_text(412.0), cell_text(0.45), cell_text(None), cell_text(" a ")
    ('412', '0.45', '', 'a')
    """
    if cell is None:
        return ""
    if isinstance(cell, bool):
        return "TRUE" if cell else "FALSE"
    if isinstance(cell, float):
        if math.isfinite(cell) and cell == int(cell) and abs(cell) < 1e15:
            return str(int(cell))
        return repr(cell)
    if isinstance(cell, (_dt.datetime, _dt.date, _dt.time)):
        return cell.isoformat()
    return str(cell).strip()


def parse_number(cell, *, decimal_comma: bool = False) -> float | None:
    """A finite number from a cell, or ``None`` when the cell is not one.

    Accepts numbers, and text such as ``"0.45"``, ``"-.3"``, ``"\u22120.3"`` (typographic minus) and, with
    ``decimal_comma``, ``"0,45"``. Booleans, ``nan``, ``inf`` and thousands separators are not numbers.

    >>> parse_number("0,45", decimal_comma=True), parse_number("0,45"), parse_number(" -.5 ")
    (0.45, None, -0.5)
    """
    if isinstance(cell, bool) or cell is None:
        return None
    if isinstance(cell, (int, float)):
        try:
            value = float(cell)
        except OverflowError:
            return None
        return value if math.isfinite(value) else None
    if not isinstance(cell, str):
        return None
    s = cell.strip().replace("\u2212", "-")
    if decimal_comma and s.count(",") == 1 and "." not in s:
        s = s.replace(",", ".")
    if not _NUMBER.fullmatch(s):
        return None
    value = float(s)
    return value if math.isfinite(value) else None


def parse_flag(cell) -> bool | None:
    """A yes/no cell: 1/0, yes/no, y/n, true/false (any case); blank is no. ``None`` when unreadable.

    >>> parse_flag("Yes"), parse_flag(""), parse_flag(0), parse_flag("maybe")
    (True, False, False, None)
    """
    if cell is None:
        return False
    if isinstance(cell, bool):
        return cell
    if isinstance(cell, (int, float)):
        return {1: True, 0: False}.get(cell) if cell in (0, 1) else None
    s = str(cell).strip().lower()
    if s in _TRUE:
        return True
    if s in _FALSE:
        return False
    return None


def describe_bad_number(cell, decimal_comma: bool) -> str:
    """Why a cell is not a number, in words for the message."""
    text = cell_text(cell)
    if text.upper() in _SPREADSHEET_ERRORS:
        return f"the cell shows the spreadsheet error {text}"
    if isinstance(cell, bool):
        return f"{text!r} is a yes/no value, not a number"
    hint = ""
    if isinstance(cell, str) and "," in cell and not decimal_comma:
        hint = " (a decimal comma is read only in files separated by ';' and in workbooks)"
    return f"{text!r} is not a number{hint}"
