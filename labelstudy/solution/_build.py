"""Turn raw tables (or JSON parts) into a checked :class:`Solution`.

Every check that can refuse a file lives here or in the readers, and every refusal is a
:class:`SolutionImportError` naming the file, and the row and column where there is one.
"""

from __future__ import annotations

import re
from dataclasses import dataclass, field

from labelstudy.errors import SolutionImportError
from labelstudy.solution._cells import (RawTable, cell_text, describe_bad_number, is_blank, parse_flag,
                                        parse_number)
from labelstudy.solution.model import Factor, Item, Solution

__all__ = ["items_from_table", "factors_from_table", "phi_from_table", "meta_from_table", "assemble",
           "ItemsPart", "PhiPart", "PHI_TOLERANCE"]

TEXT_HEADERS = ("text", "item_text", "wording", "label")
REVERSE_HEADERS = ("reverse", "reversed", "reverse_keyed")
EXTRA_HEADERS = ("h2", "communality", "communalities", "u2", "uniqueness", "uniquenesses", "com",
                 "complexity", "comment", "comments", "note", "notes")
FACTOR_ID_HEADERS = ("factor", "id", "factor_id", "code")
FACTOR_NAME_HEADERS = ("name", "factor_name", "label", "title")
FACTOR_DEF_HEADERS = ("definition", "description", "def")
META_ALIASES = {"sample_size": "n", "samplesize": "n", "n_obs": "n", "nobs": "n", "cases": "n",
                "extraction_method": "extraction", "method": "extraction", "fm": "extraction",
                "rotation_method": "rotation", "rotate": "rotation"}
PHI_TOLERANCE = 1e-3  # symmetry and unit-diagonal tolerance for printed (rounded) matrices


def norm_header(h: str) -> str:
    """Header as matched against known names: lower case, runs of spaces/hyphens/dots as ``_``.

    >>> norm_header(" Item Text "), norm_header("reverse-keyed")
    ('item_text', 'reverse_keyed')
    """
    return re.sub(r"[\s\-.]+", "_", h.strip().lower()).strip("_")


@dataclass
class ItemsPart:
    """Items as read, loadings still in loading-column order, with where each came from."""

    file: str
    items: list[Item]
    loading_ids: list[str]
    locations: list[int | None] = field(default_factory=list)  # row numbers (tables) or None (JSON)
    notes: list[str] = field(default_factory=list)


@dataclass
class PhiPart:
    """A checked factor correlation matrix with its own factor ids."""

    file: str
    ids: list[str]
    values: dict[tuple[str, str], float]


def missing_loading_message(item_id: str, fid: str, workbook: bool) -> str:
    extra = (" (an empty cell, or a formula whose value was never saved: formulas are not evaluated, "
             "paste values instead)") if workbook else ""
    return (f"missing loading for item {item_id!r} on factor {fid!r}{extra}; export the full loading matrix "
            f"without hiding small loadings")


def checked_loading(value: float, item_id: str, fid: str, error) -> float:
    """Refuse an improper (Heywood) loading, ``|loading| > 1``."""
    if abs(value) > 1:
        raise error(f"Heywood case: item {item_id!r} has a loading of {value:g} on factor {fid!r} "
                    f"(|loading| > 1), an improper solution; fix the analysis (for example fewer factors "
                    f"or another extraction method) before labelling")
    return value


def items_from_table(t: RawTable, *, require_text: bool, workbook: bool = False) -> ItemsPart:
    """Read the items/loadings table (first column = item id; see the module docs for the rest)."""
    if len(t.header) < 2 and not t.rows:
        raise t.error("the items table has only a header row and no items")
    text_j = rev_j = None
    extras: list[int] = []
    factor_js: list[int] = []
    seen: dict[str, int] = {}
    for j, h in enumerate(t.header):
        if j == 0:
            continue
        key = norm_header(h)
        if not h:
            raise t.error("this column holds values but has no header; name the factor (or delete the "
                          "column)", t.header_row, j)
        if h in seen:
            raise t.error(f"the header {h!r} appears twice (also in column {t.column_name(seen[h])!r})",
                          t.header_row, j)
        seen[h] = j
        if key in TEXT_HEADERS and text_j is None:
            text_j = j
        elif key in REVERSE_HEADERS and rev_j is None:
            rev_j = j
        elif key in EXTRA_HEADERS:
            extras.append(j)
        else:
            factor_js.append(j)
    if not t.rows:
        raise t.error("the items table has a header but no item rows")
    notes: list[str] = []
    if text_j is None:
        if require_text:
            raise t.error("no item text column: add a column headed 'text' (or item_text, wording, label) "
                          "holding the wording judges will read")
        notes.append("no item text column; texts must be added before judges can see the items "
                     "(the item ids stand in for now)")
    if not factor_js:
        raise t.error("no loading columns: after the item id and text the table needs one numeric column "
                      "per factor")
    if len(factor_js) < 2:
        raise t.error(f"fewer than two factors: only the loading column {t.header[factor_js[0]]!r}; "
                      f"labels can only be told apart with two or more factors", t.header_row, factor_js[0])
    loading_ids = [t.header[j] for j in factor_js]
    items: list[Item] = []
    rows: list[int | None] = []
    first_seen: dict[str, int] = {}
    for n, cells in t.rows:
        item_id = cell_text(cells[0])
        if not item_id:
            raise t.error("this row has values but no item id", n, 0)
        folded = item_id.casefold()
        if folded in first_seen:
            raise t.error(f"duplicate item id {item_id!r} (first used in row {first_seen[folded]})", n, 0)
        first_seen[folded] = n
        if text_j is None:
            text = item_id
        else:
            text = cell_text(cells[text_j])
            if not text:
                raise t.error(f"item {item_id!r} has no text; write the wording judges will read", n, text_j)
        loadings = []
        for j in factor_js:
            fid = t.header[j]
            cell = cells[j]
            if is_blank(cell):
                raise t.error(missing_loading_message(item_id, fid, workbook), n, j)
            value = parse_number(cell, decimal_comma=t.decimal_comma)
            if value is None:
                raise t.error(f"the loading of item {item_id!r} on factor {fid!r} is not numeric: "
                              f"{describe_bad_number(cell, t.decimal_comma)}", n, j)
            loadings.append((fid, checked_loading(value, item_id, fid, lambda m: t.error(m, n, j))))
        reverse = None
        if rev_j is not None:
            reverse = parse_flag(cells[rev_j])
            if reverse is None:
                raise t.error(f"reverse-keyed flag of item {item_id!r} must be 1/0, yes/no, y/n, true/false "
                              f"or blank, not {cell_text(cells[rev_j])!r}", n, rev_j)
        kept = tuple((t.header[j], cell_text(cells[j])) for j in extras if not is_blank(cells[j]))
        items.append(Item(item_id, text, tuple(loadings), reverse, kept))
        rows.append(n)
    return ItemsPart(t.file, items, loading_ids, rows, notes)


def _find(t: RawTable, names) -> int | None:
    for j, h in enumerate(t.header):
        if norm_header(h) in names:
            return j
    return None


def factors_from_table(t: RawTable) -> tuple[list[Factor], list[str]]:
    """Read the factors table (columns factor, name, definition). Returns factors and notes."""
    id_j = _find(t, FACTOR_ID_HEADERS)
    id_j = 0 if id_j is None else id_j
    name_j = _find(t, FACTOR_NAME_HEADERS)
    def_j = _find(t, FACTOR_DEF_HEADERS)
    if name_j is None or name_j == id_j:
        raise t.error("the factors table needs a column headed 'name' (and one headed 'definition')",
                      t.header_row)
    notes: list[str] = []
    if def_j is None:
        notes.append(f"{t.file}: no 'definition' column; definitions are empty (to be written)")
    if not t.rows:
        raise t.error("the factors table has a header but no factor rows")
    factors: list[Factor] = []
    seen: dict[str, int] = {}
    undefined = []
    for n, cells in t.rows:
        fid = cell_text(cells[id_j])
        if not fid:
            raise t.error("this row has values but no factor id", n, id_j)
        if fid in seen:
            raise t.error(f"factor {fid!r} is listed twice (first in row {seen[fid]})", n, id_j)
        seen[fid] = n
        name = cell_text(cells[name_j])
        if not name:
            raise t.error(f"factor {fid!r} has no name", n, name_j)
        definition = cell_text(cells[def_j]) if def_j is not None else ""
        if def_j is not None and not definition:
            undefined.append(fid)
        factors.append(Factor(fid, name, definition))
    if undefined:
        notes.append(f"factors without a definition (to be written): {', '.join(undefined)}")
    return factors, notes


def check_phi(file: str, ids: list[str], raw: dict[tuple[str, str], object], decimal_comma: bool,
              locate) -> PhiPart:
    """Check a factor correlation matrix given as raw cells keyed ``(row_id, column_id)``.

    Blank cells are filled from the mirror cell (a printed lower or upper triangle). The matrix must be
    symmetric and have a unit diagonal within :data:`PHI_TOLERANCE`, off-diagonal values in [-1, 1].
    ``locate(r, c)`` gives ``(row, column)`` for messages.
    """
    def err(msg, r=None, c=None):
        row, col = locate(r, c) if r is not None else (None, None)
        return SolutionImportError(msg, file=file, row=row, column=col)

    values: dict[tuple[str, str], float | None] = {}
    for r in ids:
        for c in ids:
            cell = raw.get((r, c))
            if is_blank(cell):
                values[(r, c)] = None
                continue
            v = parse_number(cell, decimal_comma=decimal_comma)
            if v is None:
                raise err(f"phi value for {r}/{c} is not numeric: {describe_bad_number(cell, decimal_comma)}",
                          r, c)
            values[(r, c)] = v
    for r in ids:
        for c in ids:
            if values[(r, c)] is None:
                values[(r, c)] = values[(c, r)]
            if values[(r, c)] is None:
                raise err(f"phi value for {r}/{c} is missing", r, c)
    for r in ids:
        if abs(values[(r, r)] - 1) > PHI_TOLERANCE:
            raise err(f"the diagonal of phi must be 1 (a factor correlates 1 with itself); "
                      f"{r}/{r} is {values[(r, r)]:g}", r, r)
    for a, r in enumerate(ids):
        for c in ids[a + 1:]:
            for x, y in ((r, c), (c, r)):
                if abs(values[(x, y)]) > 1:
                    raise err(f"phi value for {x}/{y} is {values[(x, y)]:g}, outside [-1, 1]", x, y)
            if abs(values[(r, c)] - values[(c, r)]) > PHI_TOLERANCE:
                raise err(f"phi is not symmetric: {r}/{c} is {values[(r, c)]:g} but {c}/{r} is "
                          f"{values[(c, r)]:g}", c, r)
    return PhiPart(file, list(ids), {k: float(v) for k, v in values.items()})


def phi_from_table(t: RawTable) -> PhiPart:
    """Read a square phi table: header and first column hold the factor ids."""
    col_ids = list(t.header[1:])
    for j, h in enumerate(col_ids, start=1):
        if not h:
            raise t.error("a phi column has no factor id in the header", t.header_row, j)
        if col_ids.index(h) != j - 1:
            raise t.error(f"factor {h!r} appears twice in the phi header", t.header_row, j)
    row_ids, row_of = [], {}
    for n, cells in t.rows:
        rid = cell_text(cells[0])
        if not rid:
            raise t.error("a phi row has no factor id", n, 0)
        if rid in row_of:
            raise t.error(f"factor {rid!r} appears twice as a phi row (first in row {row_of[rid]})", n, 0)
        row_ids.append(rid)
        row_of[rid] = n
    if len(row_ids) != len(col_ids):
        raise t.error(f"phi is not square: {len(col_ids)} factor columns but {len(row_ids)} factor rows")
    if set(row_ids) != set(col_ids):
        only_r = [r for r in row_ids if r not in col_ids]
        only_c = [c for c in col_ids if c not in row_ids]
        raise t.error(f"phi row ids and column ids differ: rows only {', '.join(only_r)}; "
                      f"columns only {', '.join(only_c)}")
    cells_by_row = {cell_text(cells[0]): cells for _, cells in t.rows}
    raw = {(r, c): cells_by_row[r][j] for r in row_ids for j, c in enumerate(col_ids, start=1)}
    return check_phi(t.file, col_ids, raw, t.decimal_comma,
                     lambda r, c: (row_of[r], c))


def meta_from_table(t: RawTable) -> dict[str, str]:
    """Read a key/value table. A first row ``key, value`` is a header; otherwise it is data."""
    rows = list(t.rows)
    if [norm_header(h) for h in t.header[:2]] != ["key", "value"]:
        rows.insert(0, (t.header_row, tuple(t.header)))
    pairs = []
    for n, cells in rows:
        key = cell_text(cells[0])
        value = cell_text(cells[1]) if len(cells) > 1 else ""
        if not key:
            raise SolutionImportError("a metadata row has a value but no key", file=t.file, row=n)
        pairs.append((key, value, n))
    return meta_from_pairs(t.file, pairs)


def meta_from_pairs(file: str, pairs) -> dict[str, str]:
    """Normalise metadata keys (lower case, aliases such as ``sample_size`` -> ``n``); ``n`` must be a
    positive whole number."""
    meta: dict[str, str] = {}
    for key, value, n in pairs:
        k = norm_header(key)
        k = META_ALIASES.get(k, k)
        if k in meta:
            raise SolutionImportError(f"metadata key {key!r} is given twice", file=file, row=n)
        if k == "n" and value:
            num = parse_number(value)
            if num is None or num != int(num) or num < 1:
                raise SolutionImportError(f"the sample size n must be a positive whole number, not {value!r}",
                                          file=file, row=n)
            value = str(int(num))
        meta[k] = value
    return meta


def assemble(part: ItemsPart, factors: list[Factor] | None, factors_file: str | None,
             phi: PhiPart | None, meta: dict[str, str], source: str, notes: list[str]) -> Solution:
    """Cross-check the parts and build the solution in factor order."""
    notes = list(part.notes) + list(notes)
    ids = part.loading_ids
    if factors is None:
        factors = [Factor(f, f, "") for f in ids]
        notes.append(f"no factors table: factors are named by their loading column headers "
                     f"({', '.join(ids)}) and have no definitions yet (to be written)")
    else:
        listed = [f.id for f in factors]
        only_table = [f for f in listed if f not in ids]
        only_cols = [f for f in ids if f not in listed]
        if only_table or only_cols:
            parts = []
            if only_table:
                parts.append(f"factors without a loading column: {', '.join(only_table)}")
            if only_cols:
                parts.append(f"loading columns without a row in the factors table: {', '.join(only_cols)}")
            raise SolutionImportError("the factors table does not match the loading columns of "
                                      f"{part.file}: " + "; ".join(parts), file=factors_file)
    order = [f.id for f in factors]
    items = tuple(Item(it.id, it.text, tuple((f, dict(it.loadings)[f]) for f in order), it.reverse_keyed,
                       it.extras) for it in part.items)
    phi_t = None
    if phi is not None:
        if set(phi.ids) != set(order):
            only_phi = [f for f in phi.ids if f not in order]
            only_f = [f for f in order if f not in phi.ids]
            raise SolutionImportError(f"the phi factor ids do not match the factors: only in phi "
                                      f"{', '.join(only_phi) or '-'}; missing from phi {', '.join(only_f) or '-'}",
                                      file=phi.file)
        phi_t = tuple(tuple(phi.values[(r, c)] for c in order) for r in order)
    return Solution(items, tuple(factors), phi_t, tuple(meta.items()), source, tuple(notes))
