"""Tests of the EFA-solution importer (labelstudy.solution) and the ``solution check`` command.

Threshold defaults are the common-practice rules of thumb listed in METHODS.md ("Factor-analysis rules of
thumb, common practice (no single source)"): salient >= .40, cross-loading second >= .30 or within .20,
three or more items per factor, |phi| above about .80.
"""

from __future__ import annotations

import json
import shutil
import zipfile
from pathlib import Path

import openpyxl
import pytest
from click.testing import CliRunner

from labelstudy.cli.solution import solution as solution_cli
from labelstudy.errors import SolutionImportError
from labelstudy.solution import (Factor, Item, Solution, Thresholds, diagnose, load_solution,
                                 read_solution_bytes)

SAMPLE = Path(__file__).resolve().parents[1] / "sample_studies" / "community_orchards" / "solution"

BASE = ("item,text,F1,F2\n"
        "q1,I prune the trees,0.70,0.10\n"
        "q2,I graft new varieties,0.60,0.20\n"
        "q3,I know my neighbours,0.10,0.80\n"
        "q4,I chat at work days,0.20,0.70\n")
FACTORS = "factor,name,definition\nF1,Skills,Learning orchard skills\nF2,Ties,Knowing neighbours\n"
EXPECTED_LOADINGS = [(0.70, 0.10), (0.60, 0.20), (0.10, 0.80), (0.20, 0.70)]


def write(tmp_path: Path, name: str, content: str | bytes) -> Path:
    p = tmp_path / name
    p.write_bytes(content if isinstance(content, bytes) else content.encode("utf-8"))
    return p


def loadings(sol: Solution):
    return [tuple(v for _, v in it.loadings) for it in sol.items]


def refused(path_or_call, *parts, **kw) -> SolutionImportError:
    """Run the import and check that the single message holds every expected part."""
    with pytest.raises(SolutionImportError) as info:
        if callable(path_or_call):
            path_or_call()
        else:
            load_solution(path_or_call, **kw)
    message = str(info.value)
    assert "\n" not in message
    for part in parts:
        assert part in message, message
    return info.value


def make_book(path: Path, sheets: dict[str, list[list]]) -> Path:
    wb = openpyxl.Workbook()
    for k, (name, rows) in enumerate(sheets.items()):
        ws = wb.active if k == 0 else wb.create_sheet()
        ws.title = name
        for r in rows:
            ws.append(r)
    wb.save(path)
    return path


# --------------------------------------------------------------------------------------------- tolerated

def test_plain_csv_reads_items_in_order(tmp_path):
    sol = load_solution(write(tmp_path, "s.csv", BASE))
    assert [it.id for it in sol.items] == ["q1", "q2", "q3", "q4"]
    assert loadings(sol) == EXPECTED_LOADINGS
    assert sol.items[0].text == "I prune the trees"
    assert sol.items[0].reverse_keyed is None
    assert sol.items[0].loading("F2") == 0.10


def test_utf8_bom_is_dropped(tmp_path):
    sol = load_solution(write(tmp_path, "s.csv", b"\xef\xbb\xbf" + BASE.encode()))
    assert sol.items[0].id == "q1" and loadings(sol) == EXPECTED_LOADINGS


def test_semicolon_with_decimal_comma(tmp_path):
    text = BASE.replace(",", ";").replace("0.", "0,")
    sol = load_solution(write(tmp_path, "s.csv", text))
    assert loadings(sol) == EXPECTED_LOADINGS


def test_numbers_stored_as_text_in_excel(tmp_path):
    rows = [[c for c in line.split(",")] for line in BASE.strip().splitlines()]
    rows[2][3] = "0,20"  # a decimal comma typed as text
    path = make_book(tmp_path / "s.xlsx", {"items": rows})
    wb = openpyxl.load_workbook(path)
    assert isinstance(wb["items"]["C2"].value, str)  # the numbers really are text cells
    sol = load_solution(path)
    assert loadings(sol) == EXPECTED_LOADINGS


def test_blank_rows_and_blank_columns(tmp_path):
    lines = []
    for line in BASE.strip().splitlines():
        c = line.split(",")
        lines.append(",".join(c[:2] + [""] + c[2:] + ["", ""]))  # a blank column inside, two at the end
    text = "\n".join([",,,,,", lines[0], lines[1], ",,,,", lines[2], "", lines[3], lines[4], ""])
    sol = load_solution(write(tmp_path, "s.csv", text))
    assert loadings(sol) == EXPECTED_LOADINGS
    assert sol.factor_ids == ("F1", "F2")


def test_stray_spaces_in_headers_and_cells(tmp_path):
    text = " item , text ,  F1 ,F2  \n" + "\n".join(
        ",".join(f"  {c} " for c in line.split(",")) for line in BASE.strip().splitlines()[1:])
    sol = load_solution(write(tmp_path, "s.csv", text))
    assert sol.factor_ids == ("F1", "F2")
    assert sol.items[0].id == "q1" and sol.items[0].text == "I prune the trees"
    assert loadings(sol) == EXPECTED_LOADINGS


def test_windows_line_ends(tmp_path):
    sol = load_solution(write(tmp_path, "s.csv", BASE.replace("\n", "\r\n")))
    assert loadings(sol) == EXPECTED_LOADINGS
    assert sol.items[-1].loading("F2") == 0.70


def test_tab_separated(tmp_path):
    sol = load_solution(write(tmp_path, "s.tsv", BASE.replace(",", "\t")))
    assert loadings(sol) == EXPECTED_LOADINGS


def test_windows_1252_text_is_read_with_a_note(tmp_path):
    text = BASE.replace("I prune the trees", "I prune the trees in the caf\u00e9 garden")
    sol = load_solution(write(tmp_path, "s.csv", text.encode("cp1252")))
    assert sol.items[0].text.endswith("caf\u00e9 garden")
    assert any("Windows-1252" in n for n in sol.notes)


def test_reverse_flag_values_and_extras(tmp_path):
    text = ("Variable,wording,MR1,MR2,reversed,h2,u2,com,comment\n"
            "a,A,0.7,0.1,yes,0.5,0.5,1.0,check wording\n"
            "b,B,-0.6,0.2,Y,0.4,0.6,1.2,\n"
            "c,C,0.1,0.8,0,0.6,0.4,1.0,\n"
            "d,D,0.2,0.7,,0.5,0.5,1.1,\n")
    sol = load_solution(write(tmp_path, "s.csv", text))
    assert [it.reverse_keyed for it in sol.items] == [True, True, False, False]
    assert sol.items[0].extras == (("h2", "0.5"), ("u2", "0.5"), ("com", "1.0"), ("comment", "check wording"))
    assert sol.factor_ids == ("MR1", "MR2")


def test_phi_lower_triangle_is_mirrored(tmp_path):
    items = write(tmp_path, "s.csv", BASE)
    write(tmp_path, "s.phi.csv", ",F1,F2\nF1,1,\nF2,0.4,1\n")
    sol = load_solution(items)
    assert sol.phi == ((1.0, 0.4), (0.4, 1.0))


def test_sibling_and_explicit_tables(tmp_path):
    items = write(tmp_path, "s.csv", BASE)
    write(tmp_path, "s.factors.csv", FACTORS)
    other = write(tmp_path, "other_factors.csv", FACTORS.replace("Skills", "Craft"))
    assert load_solution(items).factor("F1").name == "Skills"
    assert load_solution(items, factors=other).factor("F1").name == "Craft"


def test_text_cell_starting_with_equals_stays_text(tmp_path):
    path = tmp_path / "s.xlsx"
    rows = [line.split(",") for line in BASE.strip().splitlines()]
    rows = [[float(c) if k >= 2 and n else c for k, c in enumerate(r)] for n, r in enumerate(rows)]
    make_book(path, {"items": rows})
    wb = openpyxl.load_workbook(path)
    cell = wb["items"]["B2"]
    cell.value = "=SUM(C2:D2)"
    cell.data_type = "s"  # stored as a text cell, as a spreadsheet does after a leading apostrophe
    wb.save(path)
    sol = load_solution(path)
    assert sol.items[0].text == "=SUM(C2:D2)"


def test_formula_loading_is_never_evaluated(tmp_path):
    path = tmp_path / "s.xlsx"
    rows = [line.split(",") for line in BASE.strip().splitlines()]
    rows = [[float(c) if k >= 2 and n else c for k, c in enumerate(r)] for n, r in enumerate(rows)]
    rows[1][2] = "=0.35*2"  # a real formula, saved without a computed value
    make_book(path, {"items": rows})
    refused(path, "s.xlsx", "row 2", "column 'F1'", "formulas are not evaluated")


# --------------------------------------------------------------------------------------------- refused

def test_empty_file(tmp_path):
    refused(write(tmp_path, "empty.csv", b""), "empty.csv", "empty")


def test_header_only_file(tmp_path):
    refused(write(tmp_path, "head.csv", "item,text,F1,F2\n"), "head.csv", "no item rows")


def test_duplicate_item_ids(tmp_path):
    text = BASE + "q2,Again,0.5,0.1\n"
    refused(write(tmp_path, "dup.csv", text), "dup.csv", "row 6", "column 'item'", "duplicate item id 'q2'",
            "row 3")


def test_non_numeric_loading(tmp_path):
    text = BASE.replace("0.60,0.20", "0.60,high")
    refused(write(tmp_path, "nn.csv", text), "nn.csv", "row 3", "column 'F2'", "'high' is not a number")


def test_missing_loading(tmp_path):
    text = BASE.replace("0.10,0.80", ",0.80")
    refused(write(tmp_path, "miss.csv", text), "miss.csv", "row 4", "column 'F1'", "missing loading",
            "'q3'")


def test_heywood_case(tmp_path):
    text = BASE.replace("0.20,0.70", "0.20,1.04")
    refused(write(tmp_path, "hey.csv", text), "hey.csv", "row 5", "column 'F2'", "Heywood case", "'q4'")


def test_factors_table_not_matching_loading_columns(tmp_path):
    items = write(tmp_path, "s.csv", BASE)
    write(tmp_path, "s.factors.csv", FACTORS.replace("F2,Ties", "F3,Ties"))
    refused(items, "s.factors.csv", "factors without a loading column: F3",
            "loading columns without a row in the factors table: F2")


def test_fewer_than_two_factors(tmp_path):
    text = "item,text,F1\nq1,A,0.7\nq2,B,0.6\n"
    refused(write(tmp_path, "one.csv", text), "one.csv", "row 1", "column 'F1'", "fewer than two factors")


def test_item_without_text(tmp_path):
    text = BASE.replace("q3,I know my neighbours,", "q3,,")
    refused(write(tmp_path, "nt.csv", text), "nt.csv", "row 4", "column 'text'", "'q3' has no text")


def test_missing_text_column_refused_for_a_study_allowed_for_check(tmp_path):
    text = "\n".join(",".join(c for k, c in enumerate(line.split(",")) if k != 1)
                     for line in BASE.strip().splitlines())
    path = write(tmp_path, "raw.csv", text)
    refused(path, "raw.csv", "no item text column")
    sol = load_solution(path, require_text=False)
    assert sol.items[0].text == "q1"
    assert any("texts must be added" in n for n in sol.notes)


def test_row_numbers_count_blank_rows(tmp_path):
    lines = BASE.strip().splitlines()
    text = "\n".join([lines[0], lines[1], "", "", lines[2].replace("0.60", "x"), lines[3], lines[4]])
    refused(write(tmp_path, "gap.csv", text), "gap.csv", "row 5", "column 'F1'")


def test_unknown_extension(tmp_path):
    refused(write(tmp_path, "s.sav", BASE), "s.sav", "unknown file type '.sav'")


def test_old_xls_refused(tmp_path):
    refused(write(tmp_path, "s.xls", b"\xd0\xcf\x11\xe0junk"), "s.xls", ".xlsx")


def test_corrupt_xlsx_not_a_zip(tmp_path):
    refused(write(tmp_path, "bad.xlsx", b"this is not a workbook"), "bad.xlsx", "not a valid .xlsx")


def test_zip_that_is_not_a_workbook(tmp_path):
    path = tmp_path / "zip.xlsx"
    with zipfile.ZipFile(path, "w") as z:
        z.writestr("hello.txt", "hi")
    refused(path, "zip.xlsx", "damaged or not a workbook")


def test_truncated_xlsx(tmp_path):
    data = (SAMPLE / "orchard_solution.xlsx").read_bytes()
    refused(lambda: read_solution_bytes(data[: len(data) // 2], "cut.xlsx"), "cut.xlsx", ".xlsx")


def _with_phi(tmp_path, phi_text):
    items = write(tmp_path, "s.csv", BASE)
    write(tmp_path, "s.phi.csv", phi_text)
    return items


def test_phi_not_square(tmp_path):
    refused(_with_phi(tmp_path, ",F1,F2\nF1,1,0.3\n"), "s.phi.csv", "not square")


def test_phi_not_symmetric(tmp_path):
    refused(_with_phi(tmp_path, ",F1,F2\nF1,1,0.3\nF2,0.5,1\n"), "s.phi.csv", "row 3", "column 'F1'",
            "not symmetric")


def test_phi_diagonal_not_one(tmp_path):
    refused(_with_phi(tmp_path, ",F1,F2\nF1,1,0.3\nF2,0.3,0.9\n"), "s.phi.csv", "row 3", "column 'F2'",
            "diagonal")


def test_phi_value_outside_unit_interval(tmp_path):
    refused(_with_phi(tmp_path, ",F1,F2\nF1,1,1.3\nF2,1.3,1\n"), "s.phi.csv", "outside [-1, 1]")


def test_phi_ids_not_matching_factors(tmp_path):
    refused(_with_phi(tmp_path, ",F1,F9\nF1,1,0.3\nF9,0.3,1\n"), "s.phi.csv", "only in phi F9",
            "missing from phi F2")


def test_meta_n_must_be_whole(tmp_path):
    items = write(tmp_path, "s.csv", BASE)
    write(tmp_path, "s.meta.csv", "key,value\nrotation,oblimin\nsample size,four hundred\n")
    refused(items, "s.meta.csv", "row 3", "sample size")


def test_invalid_json(tmp_path):
    refused(write(tmp_path, "s.json", '{"items": [}'), "s.json", "not valid JSON")


def test_json_nan_loading_refused():
    doc = '{"items": [{"id": "a", "text": "A", "loadings": {"F1": NaN, "F2": 0.1}}]}'
    refused(lambda: read_solution_bytes(doc.encode(), "nan.json"), "nan.json", "not valid JSON")


def test_json_heywood_names_item():
    doc = {"items": [{"id": "a", "text": "A", "loadings": {"F1": 0.5, "F2": 0.1}},
                     {"id": "b", "text": "B", "loadings": {"F1": -1.2, "F2": 0.1}}]}
    refused(lambda: read_solution_bytes(json.dumps(doc).encode(), "h.json"), "h.json", "Heywood case", "'b'")


def test_missing_file(tmp_path):
    refused(tmp_path / "nope.csv", "nope.csv", "no such file")


# --------------------------------------------------------------------------------------------- sample study

def _flagged(diag):
    items = {r.item: list(r.flags) for r in diag.items.itertuples() if r.flags}
    factors = {r.factor: list(r.flags) for r in diag.factors.itertuples() if r.flags}
    return items, factors


def test_sample_csv_and_xlsx_are_equal():
    a = load_solution(SAMPLE / "orchard_solution.csv")
    b = load_solution(SAMPLE / "orchard_solution.xlsx")
    assert (a.items, a.factors, a.phi, a.meta) == (b.items, b.factors, b.phi, b.meta)
    assert len(a.items) == 20 and a.factor_ids == ("F1", "F2", "F3", "F4")
    assert dict(a.meta) == {"extraction": "minres", "rotation": "oblimin", "n": "412",
                            "software": "statistics package export, invented data"}
    assert a.phi_frame().loc["F2", "F4"] == 0.55


def test_sample_folder_form_is_equal(tmp_path):
    for role in ("factors", "phi", "meta"):
        shutil.copy(SAMPLE / f"orchard_solution.{role}.csv", tmp_path / f"{role}.csv")
    shutil.copy(SAMPLE / "orchard_solution.csv", tmp_path / "items.csv")
    a = load_solution(SAMPLE / "orchard_solution.csv")
    b = load_solution(tmp_path)
    assert (a.items, a.factors, a.phi, a.meta) == (b.items, b.factors, b.phi, b.meta)


@pytest.mark.parametrize("name", ["orchard_solution.csv", "orchard_solution.xlsx"])
def test_sample_has_exactly_the_planted_flags(name):
    sol = load_solution(SAMPLE / name)
    diag = diagnose(sol)
    assert _flagged(diag) == ({"O14": ["cross_loading"]}, {"F4": ["few_items"]})
    row = diag.items.set_index("item").loc["O14"]
    assert (row.primary, row.primary_loading, row.secondary, row.secondary_loading) == ("F2", 0.45, "F4", 0.38)
    assert diag.factors.set_index("factor").loc["F4", "salient_items"] == 2
    assert not any("orthogonal" in n for n in diag.notes)


def test_sample_loadings_only_export():
    path = SAMPLE / "orchard_loadings_only.csv"
    refused(path, "orchard_loadings_only.csv", "no item text column")
    sol = load_solution(path, require_text=False)
    assert sol.factor_ids == ("MR1", "MR2", "MR3", "MR4")
    assert all(f.definition == "" and f.name == f.id for f in sol.factors)
    assert any("to be written" in n for n in sol.notes)
    assert dict(sol.item("O01").extras) == {"h2": "0.61", "u2": "0.39", "com": "1.04"}
    full = load_solution(SAMPLE / "orchard_solution.csv")
    assert loadings(sol) == loadings(full)
    assert _flagged(diagnose(sol)) == ({"O14": ["cross_loading"]}, {"MR4": ["few_items"]})


# --------------------------------------------------------------------------------------------- derivation

def _sol(rows, phi=None, meta=(), reverse=None):
    ids = [f"F{k + 1}" for k in range(len(rows[0]))]
    items = tuple(Item(f"i{n}", "t", tuple(zip(ids, r)), None if reverse is None else reverse[n])
                  for n, r in enumerate(rows))
    return Solution(items, tuple(Factor(f, f"name {f}", "") for f in ids), phi, tuple(meta), "test")


@pytest.mark.parametrize("salient, expected", [(0.40, []), (0.50, ["no_salient"])])
def test_salient_threshold(salient, expected):
    d = diagnose(_sol([(0.45, 0.05)]), Thresholds(salient=salient))
    assert d.items["flags"][0] == expected


@pytest.mark.parametrize("second, cross_secondary, flagged", [
    (0.29, 0.30, False), (0.30, 0.30, True), (0.30, 0.35, False)])
def test_cross_secondary_threshold(second, cross_secondary, flagged):
    d = diagnose(_sol([(0.90, second)]), Thresholds(cross_secondary=cross_secondary))
    assert ("cross_loading" in d.items["flags"][0]) is flagged


@pytest.mark.parametrize("first, second, gap, flagged", [
    (0.60, 0.40, 0.20, False),   # exactly .20 apart (0.60 - 0.40 is 0.1999... in floating point)
    (0.59, 0.40, 0.20, True), (0.55, 0.25, 0.20, False), (0.55, 0.25, 0.35, True)])
def test_cross_gap_threshold(first, second, gap, flagged):
    d = diagnose(_sol([(first, second)]), Thresholds(cross_secondary=0.45, cross_gap=gap))
    assert ("cross_loading" in d.items["flags"][0]) is flagged


def test_gap_rule_needs_a_salient_primary():
    d = diagnose(_sol([(0.25, 0.20)]))
    assert d.items["flags"][0] == ["no_salient"]


def test_primary_secondary_signed_and_ties_go_to_first_factor():
    d = diagnose(_sol([(0.5, -0.5, 0.1), (0.1, -0.7, 0.2)]))
    r0, r1 = d.items.iloc[0], d.items.iloc[1]
    assert (r0.primary, r0.secondary, r0.secondary_loading) == ("F1", "F2", -0.5)
    assert (r1.primary, r1.primary_loading, r1.secondary) == ("F2", -0.7, "F3")


def test_negative_and_reverse_keyed_flags():
    d = diagnose(_sol([(-0.6, 0.1), (-0.6, 0.1), (0.6, 0.1)], reverse=[None, True, True]))
    assert list(d.items["flags"]) == [["negative"], ["reverse_keyed"], []]


@pytest.mark.parametrize("min_items, flagged", [(3, True), (2, False)])
def test_min_items(min_items, flagged):
    d = diagnose(_sol([(0.7, 0.1), (0.6, 0.1), (0.7, 0.1), (0.1, 0.6), (0.1, 0.7)]),
                 Thresholds(min_items=min_items))
    assert d.factors["flags"].tolist() == [[], ["few_items"] if flagged else []]
    assert d.factors["salient_items"].tolist() == [3, 2]
    assert any("three or more items" in n or "3 or more" in n for n in d.notes) is flagged


@pytest.mark.parametrize("r, phi_high, flagged", [(0.85, 0.80, True), (0.79, 0.80, False),
                                                  (0.79, 0.75, True), (-0.82, 0.80, True)])
def test_high_correlation(r, phi_high, flagged):
    rows = [(0.7, 0.1)] * 3 + [(0.1, 0.7)] * 3
    d = diagnose(_sol(rows, phi=((1.0, r), (r, 1.0))), Thresholds(phi_high=phi_high))
    expected = [["high_correlation:F2"], ["high_correlation:F1"]] if flagged else [[], []]
    assert d.factors["flags"].tolist() == expected


def test_orthogonal_notes():
    rows = [(0.7, 0.1)] * 3 + [(0.1, 0.7)] * 3
    note = "orthogonal rotation: factor correlations fixed at zero"
    assert any(note in n for n in diagnose(_sol(rows)).notes)
    assert any(note in n for n in diagnose(_sol(rows, phi=((1.0, 0.0), (0.0, 1.0)))).notes)
    assert not any(note in n for n in diagnose(_sol(rows, phi=((1.0, 0.2), (0.2, 1.0)))).notes)
    oblique = diagnose(_sol(rows, meta=(("rotation", "promax"),))).notes
    assert any("oblique" in n and "unknown" in n for n in oblique)


def test_diagnosis_to_dict_shape():
    d = diagnose(load_solution(SAMPLE / "orchard_solution.csv"), Thresholds(salient=0.5))
    out = json.loads(json.dumps(d.to_dict()))
    assert set(out) == {"items", "factors", "notes", "thresholds"}
    assert set(out["items"][0]) == {"id", "primary", "primary_loading", "secondary", "secondary_loading",
                                    "flags"}
    assert set(out["factors"][0]) == {"id", "name", "salient_items", "flags"}
    assert out["thresholds"]["salient"] == 0.5


# --------------------------------------------------------------------------------------------- round trip

def test_json_round_trip():
    sol = load_solution(SAMPLE / "orchard_solution.xlsx")
    back = Solution.from_dict(json.loads(json.dumps(sol.to_dict())))
    assert back == sol
    again = read_solution_bytes(json.dumps(sol.to_dict()).encode(), "copy.json")
    assert (again.items, again.factors, again.phi, again.meta) == (sol.items, sol.factors, sol.phi, sol.meta)


def test_json_round_trip_without_phi_and_with_reverse_none():
    sol = load_solution(SAMPLE / "orchard_loadings_only.csv", require_text=False)
    assert Solution.from_dict(sol.to_dict()) == sol


def test_json_spec_shape_with_phi_mapping():
    doc = {"items": [{"id": "a", "text": "A", "loadings": {"F1": 0.7, "F2": 0.1}, "reverse": False},
                     {"id": "b", "text": "B", "loadings": {"F1": 0.1, "F2": 0.6}}],
           "factors": [{"id": "F2", "name": "Two", "definition": "d2"},
                       {"id": "F1", "name": "One", "definition": "d1"}],
           "phi": {"F1": {"F1": 1, "F2": 0.5}, "F2": {"F2": 1}},
           "meta": {"rotation": "oblimin", "sample_size": 412}}
    sol = read_solution_bytes(json.dumps(doc).encode(), "s.json")
    assert sol.factor_ids == ("F2", "F1")
    assert sol.items[0].loadings == (("F2", 0.1), ("F1", 0.7))
    assert sol.phi == ((1.0, 0.5), (0.5, 1.0))
    assert dict(sol.meta) == {"rotation": "oblimin", "n": "412"}
    assert [it.reverse_keyed for it in sol.items] == [False, None]


def test_frames():
    sol = load_solution(SAMPLE / "orchard_solution.csv")
    frame = sol.loadings_frame()
    assert frame.shape == (20, 4) and frame.loc["O14", "F4"] == 0.38
    assert sol.phi_frame().shape == (4, 4)
    with pytest.raises(KeyError):
        sol.item("nope")


# --------------------------------------------------------------------------------------------- CLI

def test_cli_check_human():
    result = CliRunner().invoke(solution_cli, ["check", str(SAMPLE / "orchard_solution.csv")])
    assert result.exit_code == 0, result.output
    lines = result.output.splitlines()
    o14 = next(line for line in lines if line.startswith("O14"))
    assert "+0.45" in o14 and "+0.38" in o14 and "cross_loading" in o14
    f4 = next(line for line in lines if line.startswith("F4"))
    assert "Harvest Sharing" in f4 and "few_items" in f4
    assert sum("cross_loading" in line for line in lines if line[:1] == "O") == 1


def test_cli_check_json_and_thresholds():
    result = CliRunner().invoke(solution_cli, ["check", str(SAMPLE / "orchard_solution.xlsx"), "--json",
                                               "--min-items", "2"])
    assert result.exit_code == 0, result.output
    out = json.loads(result.output)
    assert out["source"].endswith("orchard_solution.xlsx")
    assert all(f["flags"] == [] for f in out["factors"])
    assert [i["id"] for i in out["items"] if i["flags"]] == ["O14"]
    assert out["thresholds"]["min_items"] == 2


def test_cli_check_error_is_one_line(tmp_path):
    bad = write(tmp_path, "bad.csv", BASE.replace("0.70", "x"))
    result = CliRunner().invoke(solution_cli, ["check", str(bad)])
    assert result.exit_code == 1
    assert result.output.strip().startswith("Error:") and len(result.output.strip().splitlines()) == 1
    assert "row 2" in result.output and "column 'F1'" in result.output


def test_cli_check_explicit_tables(tmp_path):
    items = write(tmp_path, "loads.csv", BASE)
    fac = write(tmp_path, "names.csv", FACTORS)
    result = CliRunner().invoke(solution_cli, ["check", str(items), "--factors", str(fac), "--json"])
    assert result.exit_code == 0, result.output
    assert [f["name"] for f in json.loads(result.output)["factors"]] == ["Skills", "Ties"]


def test_from_dict_keeps_a_name_being_written_but_json_import_refuses_it():
    sol = load_solution(SAMPLE / "orchard_solution.csv")
    d = sol.to_dict()
    d["factors"][1]["name"] = ""
    assert Solution.from_dict(d).factor("F2").name == ""
    refused(lambda: read_solution_bytes(json.dumps(d).encode(), "e.json"), "e.json", "'F2' has no name")
