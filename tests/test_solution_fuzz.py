"""Fuzzing of the solution importers: whatever bytes arrive, read_solution_bytes either returns a valid
Solution or raises SolutionImportError with a one-line message; no other exception escapes.

About 1,500 generated files in total: random bytes as CSV, structured CSV text, mutated valid CSVs,
random JSON, near-valid JSON solutions, mutated xlsx archives, and xlsx archives with a damaged member.
"""

from __future__ import annotations

import io
import json
import zipfile
from pathlib import Path

from hypothesis import HealthCheck, event, given, settings
from hypothesis import strategies as st

from labelstudy.errors import SolutionImportError
from labelstudy.solution import Solution, read_solution_bytes

SAMPLE = Path(__file__).resolve().parents[1] / "sample_studies" / "community_orchards" / "solution"
CSV_BYTES = (SAMPLE / "orchard_solution.csv").read_bytes()
ONLY_BYTES = (SAMPLE / "orchard_loadings_only.csv").read_bytes()
XLSX_BYTES = (SAMPLE / "orchard_solution.xlsx").read_bytes()
with zipfile.ZipFile(io.BytesIO(XLSX_BYTES)) as _z:
    XLSX_MEMBERS = {name: _z.read(name) for name in _z.namelist()}



def fuzz(n: int) -> settings:
    """Settings for one fuzz test: ``n`` examples, no deadline, no example database in the tree."""
    return settings(max_examples=n, deadline=None, database=None,
                    suppress_health_check=[HealthCheck.too_slow, HealthCheck.data_too_large])


def check(data: bytes, name: str, require_text: bool = False) -> None:
    """The property: success gives a consistent solution; failure is our error, on one line."""
    try:
        sol = read_solution_bytes(data, name, require_text=require_text)
    except SolutionImportError as e:
        assert str(e) and "\n" not in str(e)
        event("refused")
        return
    event("imported")
    assert isinstance(sol, Solution)
    assert len(sol.factors) >= 2 and sol.items
    ids = [f.id for f in sol.factors]
    assert len(set(ids)) == len(ids)
    assert len({it.id.casefold() for it in sol.items}) == len(sol.items)
    for it in sol.items:
        assert [f for f, _ in it.loadings] == ids
        assert all(abs(v) <= 1 for _, v in it.loadings)
        assert it.text
    if sol.phi is not None:
        assert len(sol.phi) == len(ids) and all(len(r) == len(ids) for r in sol.phi)
    assert Solution.from_dict(json.loads(json.dumps(sol.to_dict()))) == sol


def mutate(data: bytes, edits) -> bytes:
    buf = bytearray(data)
    for kind, pos, byte in edits:
        if not buf:
            break
        k = pos % len(buf)
        if kind == 0:
            buf[k] = byte
        elif kind == 1:
            del buf[k]
        elif kind == 2:
            buf.insert(k, byte)
        else:
            del buf[k:k + byte]
    return bytes(buf)


EDITS = st.lists(st.tuples(st.integers(0, 3), st.integers(0, 10**9), st.integers(0, 255)), min_size=1,
                 max_size=8)
CELL = st.one_of(
    st.sampled_from(["", " ", "item", "text", "F1", "F2", "MR1", "h2", "u2", "com", "reverse", "yes", "0",
                     "1", "nan", "inf", "-", "1,5", "0,45", "=1+1", "#DIV/0!", "\ufeff", '"', "\r"]),
    st.floats(allow_nan=True, allow_infinity=True).map(lambda x: f"{x:.3g}"),
    st.floats(-2, 2).map(lambda x: f"{x:.2f}"),
    st.text(max_size=12))
GOOD_ROW = st.tuples(st.text("abcq0123", min_size=1, max_size=3), st.sampled_from(["t", "", "x y"]),
                     st.floats(-1.05, 1.05).map(lambda x: f"{x:.2f}"),
                     st.floats(-1.05, 1.05).map(lambda x: f"{x:.2f}")).map(list)
ROWS = st.one_of(st.lists(st.lists(CELL, min_size=0, max_size=6), min_size=0, max_size=8),
                 st.lists(GOOD_ROW, min_size=1, max_size=6))


@fuzz(250)
@given(st.binary(max_size=400), st.sampled_from(["f.csv", "f.tsv", "f.txt"]))
def test_random_bytes_as_text_table(data, name):
    check(data, name)


@fuzz(300)
@given(ROWS, st.sampled_from([",", ";", "\t"]), st.sampled_from(["\n", "\r\n"]), st.booleans(),
       st.booleans())
def test_structured_csv(rows, delimiter, newline, bom, require_text):
    text = newline.join(delimiter.join(r) for r in [["item", "text", "F1", "F2"]] + rows)
    data = (b"\xef\xbb\xbf" if bom else b"") + text.encode("utf-8", "surrogatepass")
    check(data, "s.csv", require_text)


@fuzz(250)
@given(st.sampled_from([CSV_BYTES, ONLY_BYTES]), EDITS)
def test_mutated_valid_csv(base, edits):
    check(mutate(base, edits), "m.csv")


JSON_VALUE = st.recursive(
    st.none() | st.booleans() | st.integers(-10**30, 10**30) | st.floats(allow_nan=False) | st.text(max_size=8),
    lambda inner: st.lists(inner, max_size=4) | st.dictionaries(st.text(max_size=6), inner, max_size=4),
    max_leaves=20)


@fuzz(200)
@given(JSON_VALUE)
def test_random_json(value):
    check(json.dumps(value).encode(), "r.json")


LOADING = st.one_of(st.floats(-1.5, 1.5), st.none(), st.text(max_size=4), st.booleans(), st.integers(-2, 2))
NEAR_ITEM = st.fixed_dictionaries(
    {"id": st.one_of(st.sampled_from(["a", "b", "c", "A"]), st.integers(0, 3)),
     "loadings": st.dictionaries(st.sampled_from(["F1", "F2", "F3"]), LOADING, max_size=3)},
    optional={"text": st.one_of(st.text(max_size=5), st.none()), "reverse": st.one_of(st.booleans(), st.none(),
                                                                                      st.text(max_size=3))})
NEAR_DOC = st.fixed_dictionaries(
    {"items": st.lists(NEAR_ITEM, max_size=5)},
    optional={"factors": st.lists(st.fixed_dictionaries({"id": st.sampled_from(["F1", "F2", "F3"]),
                                                         "name": st.text(max_size=4)}), max_size=3),
              "phi": st.one_of(st.none(), JSON_VALUE,
                               st.fixed_dictionaries({"factors": st.just(["F1", "F2"]),
                                                      "matrix": st.lists(st.lists(LOADING, max_size=3),
                                                                         max_size=3)})),
              "meta": st.dictionaries(st.sampled_from(["n", "rotation", "sample size", "N"]), JSON_VALUE,
                                      max_size=3)})


@fuzz(250)
@given(NEAR_DOC)
def test_near_valid_json(doc):
    check(json.dumps(doc).encode(), "n.json")


@fuzz(120)
@given(EDITS)
def test_mutated_xlsx_bytes(edits):
    check(mutate(XLSX_BYTES, edits), "x.xlsx")


@fuzz(150)
@given(st.sampled_from(sorted(XLSX_MEMBERS)), EDITS, st.booleans())
def test_xlsx_with_damaged_member(member, edits, drop):
    out = io.BytesIO()
    with zipfile.ZipFile(out, "w", zipfile.ZIP_DEFLATED) as z:
        for name, content in XLSX_MEMBERS.items():
            if name == member:
                if drop:
                    continue
                content = mutate(content, edits)
            z.writestr(name, content)
    check(out.getvalue(), "d.xlsx")
