"""Exports: XLSX, CSVs, JSON and methods.md all show the numbers of the one RoundResults object."""

from __future__ import annotations

import csv
import io
import json
import math

import openpyxl
import pandas as pd
import pytest

from helpers_results import build
from labelstudy.results import compare_rounds, export_bytes, score_round
from labelstudy.results._data import TIDY_COLUMNS
from labelstudy.results.export import SHEET_NAMES, neutralise

DANGEROUS_TEXT = "=HYPERLINK(\"http://x\",\"click\")"
COMMENTS = {"q01": "=1+2 looks wrong", "q02": "+44 is a code", "q03": "-minus first", "q05": "@SUM(A1)"}


@pytest.fixture(scope="module")
def res(tmp_path_factory):
    project, store, sid, rids = build(tmp_path_factory.mktemp("exp") / "p", first_text=DANGEROUS_TEXT,
                                      comments=COMMENTS)
    return score_round(store, rids[0])


@pytest.fixture(scope="module")
def xlsx(res):
    return export_bytes(res, "results.xlsx")


def _close(a, b):
    if a is None or (isinstance(a, float) and math.isnan(a)):
        return b is None or (isinstance(b, float) and math.isnan(b))
    if isinstance(a, float) or isinstance(b, float):
        return b is not None and math.isclose(float(a), float(b), rel_tol=1e-12, abs_tol=1e-12)
    return a == b


def test_json_has_every_table_and_no_nan(res):
    text = export_bytes(res, "results.json").decode()
    assert "NaN" not in text
    doc = json.loads(text)
    assert set(doc["tables"]) == set(res.tables)
    ag = res.tables["agreement"]
    for rec, (_, row) in zip(doc["tables"]["agreement"], ag.iterrows()):
        assert _close(row["value"], rec["value"])
    assert doc["cautions"] == list(res.cautions)
    assert doc["rules"]["item_hit_min"]["value"] == 0.70


def test_xlsx_read_back_with_openpyxl_and_pandas_equals_json(res, xlsx):
    doc = json.loads(export_bytes(res, "results.json"))
    wb = openpyxl.load_workbook(io.BytesIO(xlsx))
    assert wb.sheetnames == [SHEET_NAMES[n] for n in res.tables]
    for name in ("agreement", "items", "labels", "judges"):
        ws = wb[SHEET_NAMES[name]]
        assert ws.freeze_panes == "A2"
        rows = list(ws.iter_rows(values_only=True))
        header = list(rows[0])
        assert header == list(res.tables[name].columns)
        for rec, row in zip(doc["tables"][name], rows[1:]):
            for col, v in zip(header, row):
                want = rec[col]
                if want == "" and v is None:
                    continue
                assert _close(want, v), (name, col, want, v)
        frame = pd.read_excel(io.BytesIO(xlsx), sheet_name=SHEET_NAMES[name])
        assert len(frame) == len(doc["tables"][name])
    frame = pd.read_excel(io.BytesIO(xlsx), sheet_name="Agreement")
    for got, rec in zip(frame["value"], doc["tables"]["agreement"]):
        assert _close(rec["value"], None if pd.isna(got) else float(got))
    # number format on fractional numbers
    ws = wb["Agreement"]
    col = [c.value for c in ws[1]].index("value") + 1
    assert ws.cell(row=2, column=col).number_format == "0.000"


def test_formula_like_text_stays_inert_in_xlsx(res, xlsx):
    wb = openpyxl.load_workbook(io.BytesIO(xlsx))
    found = {}
    for ws in (wb["Items"], wb["Comments"], wb["Answers"]):
        for row in ws.iter_rows():
            for c in row:
                if isinstance(c.value, str) and c.value[:1] in "=+-@":
                    found[c.value] = c.data_type
    assert DANGEROUS_TEXT in found
    for text in COMMENTS.values():
        assert text in found
    assert set(found.values()) == {"s"}              # strings, never formulas
    items = wb["Items"]
    header = [c.value for c in items[1]]
    assert items.cell(row=2, column=header.index("text") + 1).value == DANGEROUS_TEXT


def test_excel_csv_neutralises_and_tidy_csv_keeps_raw(res):
    raw = export_bytes(res, "answers-excel.csv")
    assert raw.startswith(b"\xef\xbb\xbf")
    rows = list(csv.reader(io.StringIO(raw.decode("utf-8-sig"))))
    assert rows[0] == TIDY_COLUMNS
    comments = {r[TIDY_COLUMNS.index("comment")] for r in rows[1:]}
    for text in COMMENTS.values():
        assert "'" + text in comments and text not in comments
    revisions = {r[TIDY_COLUMNS.index("revision")] for r in rows[1:]}
    assert revisions == {"1"}                                 # numbers stay numbers, unprefixed
    tidy = pd.read_csv(io.BytesIO(export_bytes(res, "answers.csv")), keep_default_na=False)
    assert list(tidy.columns) == TIDY_COLUMNS
    assert set(COMMENTS.values()) <= set(tidy["comment"])
    assert len(tidy) == len(res.tables["answers"])
    n_items, n_judges = 16, 8
    lm = tidy[tidy["task_kind"] == "label_match"]
    assert len(lm) == n_items * n_judges                   # one row per judge x task x item


@pytest.mark.parametrize("value, out", [("=1", "'=1"), ("+1", "'+1"), ("-1", "'-1"), ("@x", "'@x"),
                                        ("\tx", "'\tx"), ("\rx", "'\rx"), ("ok", "ok"), (-1.5, -1.5), (3, 3)])
def test_neutralise(value, out):
    assert neutralise(value) == out


def test_methods_paragraph_reports_the_same_numbers(res):
    md = export_bytes(res, "methods.md").decode()
    ag = res.tables["agreement"]
    alpha = ag[(ag["task_kind"] == "label_match") & ag["coefficient"].str.startswith("Krippendorff")].iloc[0]
    shown = f"{alpha['value']:.2f}".replace("0.", ".", 1)
    assert f"Krippendorff's alpha (nominal) = {shown}" in md
    assert "one strand of content-validity evidence, not proof of validity" in md
    assert "local professional standards" in md and "ethics" in md
    assert "Krippendorff, K. (2004)" in md and "Ayre, C., & Scally" in md and "Anderson, J. C." in md
    assert "Of 8 expert judges invited, 8 answered and 8 submitted (4 ecologist; 4 grower)" in md
    assert "q04" in md                                          # the revised items are named


def test_round_comparison(tmp_path):
    project, store, sid, rids = build(tmp_path / "p", rounds=2, tasks=[("label_match", {}), ("relevance", {})])
    a, b = score_round(store, rids[0]), score_round(store, rids[1])
    c = compare_rounds(a, b)
    items = c.items.set_index("item")
    ia, ib = a.tables["items"].set_index("item"), b.tables["items"].set_index("item")
    for iid in items.index:
        assert items.loc[iid, "hit_ratio_a"] == pytest.approx(ia.loc[iid, "hit_ratio"])
        assert items.loc[iid, "hit_ratio_change"] == pytest.approx(ib.loc[iid, "hit_ratio"] - ia.loc[iid, "hit_ratio"])
        assert items.loc[iid, "verdict_changed"] == (ia.loc[iid, "verdict"] != ib.loc[iid, "verdict"])
    ag = c.agreement.set_index(["task_kind", "coefficient"])
    assert ag.loc[("label_match", "Krippendorff's alpha (nominal)"), "value_b"] == pytest.approx(
        b.agreement_value("label_match", "Krippendorff"))
    assert c.labels.set_index("factor").loc["F3", "verdict_a"].startswith("overlapping")
    md = export_bytes(b, "methods.md", comparison=c).decode()
    assert f"Compared with round {a.meta['round_number']}" in md
    html = export_bytes(b, "report.html", comparison=c).decode()
    assert "Round 2 compared with round 1" in html
