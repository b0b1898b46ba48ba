"""Exports of one :class:`~labelstudy.results.score.RoundResults`: XLSX, tidy CSV, Excel-safe CSV, JSON.

Every export is written from the same results object; nothing is recomputed here.

* XLSX (openpyxl, whole workbook in write-only mode so the long answers sheet streams): one sheet per
  table, a frozen bold header row, column widths, ``0.000`` for fractional numbers, and every text cell
  forced to the string type so that a value starting with "=" stays text and is never a formula.
* ``answers.csv``: tidy UTF-8, one row per judge x task x answer key (columns of
  :data:`~labelstudy.results._data.TIDY_COLUMNS`), for R, pandas and friends.
* ``answers-excel.csv``: the same rows for spreadsheet programs: UTF-8 with a byte-order mark, and text
  cells that begin with ``= + - @``, a tab or a carriage return prefixed with ``'`` so that a spreadsheet
  never evaluates them (CSV formula injection); numbers stay numbers.
* JSON: every table and the rules, NaN written as null.
"""

from __future__ import annotations

import csv
import io
import json
import math
from pathlib import Path

import numpy as np
import pandas as pd
from openpyxl import Workbook
from openpyxl.cell import WriteOnlyCell
from openpyxl.styles import Alignment, Font
from openpyxl.utils import get_column_letter

__all__ = ["to_xlsx", "answers_csv", "answers_excel_csv", "to_json", "neutralise", "EXPORTS",
           "export_bytes", "write_all", "SHEET_NAMES"]

FORMULA_START = ("=", "+", "-", "@", "\t", "\r")
SHEET_NAMES = {"agreement": "Agreement", "items": "Items", "labels": "Labels", "judges": "Judges",
               "sensitivity": "Without flagged judges", "scale": "Scale", "confusion": "Confusion",
               "co_occurrence": "Co-occurrence", "clusters": "Open-sort clusters",
               "partition": "Open-sort judges", "pile_names": "Pile names", "definition_fit": "Definition fit",
               "naming": "Naming", "comments": "Comments", "rules": "Rules", "answers": "Answers"}
EXPORTS = {"report.html": "text/html; charset=utf-8",
           "results.xlsx": "application/vnd.openxmlformats-officedocument.spreadsheetml.sheet",
           "answers.csv": "text/csv; charset=utf-8", "answers-excel.csv": "text/csv; charset=utf-8",
           "results.json": "application/json", "methods.md": "text/markdown; charset=utf-8"}


def _plain(v):
    """A cell value as a plain Python scalar; None for missing."""
    if v is None or v is pd.NA or v is pd.NaT:
        return None
    if isinstance(v, (np.bool_, bool)):
        return bool(v)
    if isinstance(v, (np.integer,)):
        return int(v)
    if isinstance(v, (float, np.floating)):
        return None if not math.isfinite(float(v)) else float(v)
    if isinstance(v, (list, tuple)):
        return ", ".join(map(str, v))
    return v


def to_xlsx(results) -> bytes:
    """The workbook: one sheet per table (see the module docstring)."""
    wb = Workbook(write_only=True)
    bold = Font(bold=True)
    for name, df in results.tables.items():
        ws = wb.create_sheet(SHEET_NAMES.get(name, name)[:31])
        ws.freeze_panes = "A2"
        for i, col in enumerate(df.columns, start=1):
            sample = [len(str(col))] + [len(str(v)) for v in df[col].head(200) if v is not None]
            ws.column_dimensions[get_column_letter(i)].width = min(max(sample) + 2, 60)
        header = []
        for col in df.columns:
            c = WriteOnlyCell(ws, value=str(col))
            c.data_type = "s"
            c.font = bold
            header.append(c)
        ws.append(header)
        for row in df.itertuples(index=False, name=None):
            cells = []
            for v in row:
                v = _plain(v)
                c = WriteOnlyCell(ws, value=v)
                if isinstance(v, str):
                    c.data_type = "s"                 # never a formula, whatever the text starts with
                    if len(v) > 60:
                        c.alignment = Alignment(wrap_text=True, vertical="top")
                elif isinstance(v, float) and not v.is_integer():
                    c.number_format = "0.000"
                cells.append(c)
            ws.append(cells)
    buf = io.BytesIO()
    wb.save(buf)
    return buf.getvalue()


def answers_csv(results) -> bytes:
    """Tidy CSV of the raw answers, UTF-8 (no byte-order mark)."""
    return results.tables["answers"].to_csv(index=False, lineterminator="\n").encode("utf-8")


def neutralise(value):
    """Prefix ``'`` to text that a spreadsheet would read as a formula; numbers are left alone.

    >>> neutralise("=1+1"), neutralise("-2"), neutralise(-2), neutralise("plain")
    ("'=1+1", "'-2", -2, 'plain')
    """
    if isinstance(value, str) and value.startswith(FORMULA_START):
        return "'" + value
    return value


def answers_excel_csv(results) -> bytes:
    """The answers for spreadsheet programs: UTF-8 with BOM, text cells neutralised against formulas."""
    buf = io.StringIO()
    w = csv.writer(buf, lineterminator="\r\n")
    df = results.tables["answers"]
    w.writerow(list(df.columns))
    for row in df.itertuples(index=False, name=None):
        out = []
        for v in row:
            v = _plain(v)
            out.append("" if v is None else neutralise(v))
        w.writerow(out)
    return ("\ufeff" + buf.getvalue()).encode("utf-8")


def to_json(results) -> bytes:
    """Every result as JSON (NaN -> null)."""
    return json.dumps(results.to_dict(), indent=1, ensure_ascii=False, allow_nan=False).encode("utf-8")


def export_bytes(results, name: str, *, comparison=None) -> bytes:
    """One export by its file name (a key of :data:`EXPORTS`)."""
    if name == "results.xlsx":
        return to_xlsx(results)
    if name == "answers.csv":
        return answers_csv(results)
    if name == "answers-excel.csv":
        return answers_excel_csv(results)
    if name == "results.json":
        return to_json(results)
    if name == "report.html":
        from labelstudy.results.report import render_report
        return render_report(results, comparison=comparison).encode("utf-8")
    if name == "methods.md":
        from labelstudy.results.methods import methods_markdown
        return methods_markdown(results, comparison=comparison).encode("utf-8")
    from labelstudy.errors import LabelstudyError
    raise LabelstudyError(f"there is no export called {name!r} (choose one of {', '.join(EXPORTS)})")


def write_all(results, out_dir: str | Path, *, comparison=None) -> list[Path]:
    """Write every export into ``out_dir`` (created if needed); returns the paths in :data:`EXPORTS` order."""
    out = Path(out_dir)
    out.mkdir(parents=True, exist_ok=True)
    paths = []
    for name in EXPORTS:
        p = out / name
        p.write_bytes(export_bytes(results, name, comparison=comparison))
        paths.append(p)
    return paths
