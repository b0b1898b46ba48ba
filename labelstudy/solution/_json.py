"""The JSON solution format (also what :meth:`Solution.to_dict` writes).

``{"items": [{"id", "text", "loadings": {factor: loading}, "reverse": bool|null, "extras": {}}],
"factors": [{"id", "name", "definition"}], "phi": {F1: {F2: r}} or {"factors": [...], "matrix": [[...]]},
"meta": {key: value}}``. Only ``items`` is required.
"""

from __future__ import annotations

import json
import math

from labelstudy.errors import SolutionImportError
from labelstudy.solution._build import (ItemsPart, assemble, check_phi, checked_loading, meta_from_pairs,
                                        missing_loading_message)
from labelstudy.solution._cells import cell_text, parse_flag, parse_number
from labelstudy.solution.model import Factor, Item, Solution

__all__ = ["read_json", "solution_from_mapping"]


def read_json(data: bytes, file: str, *, require_text: bool) -> Solution:
    """Parse JSON bytes (UTF-8, byte-order mark allowed) into a checked solution."""
    try:
        text = data.decode("utf-8-sig")
    except UnicodeDecodeError:
        raise SolutionImportError("a JSON file must be UTF-8 text", file=file) from None
    if not text.strip():
        raise SolutionImportError("the file is empty", file=file)
    try:
        doc = json.loads(text, parse_constant=_reject_constant)
    except (ValueError, RecursionError) as e:
        where = f" (line {e.lineno}, column {e.colno})" if isinstance(e, json.JSONDecodeError) else ""
        raise SolutionImportError(f"this is not valid JSON{where}", file=file) from None
    return solution_from_mapping(doc, file, require_text=require_text)


def _reject_constant(name):
    raise ValueError(f"{name} is not allowed")


def _str(value, what: str, err) -> str:
    if isinstance(value, bool) or not isinstance(value, (str, int, float)):
        raise err(f"{what} must be text")
    return cell_text(value)


def _number(value, what: str, err) -> float:
    if isinstance(value, bool) or not isinstance(value, (int, float)):
        if isinstance(value, str):
            v = parse_number(value)
            if v is not None:
                return v
        raise err(f"{what} is not numeric: {value!r}" if not isinstance(value, (dict, list))
                  else f"{what} is not numeric")
    try:
        v = float(value)
    except OverflowError:
        raise err(f"{what} is not a usable number") from None
    if not math.isfinite(v):
        raise err(f"{what} is not a finite number")
    return v


def solution_from_mapping(doc, file: str, *, require_text: bool, from_store: bool = False) -> Solution:
    """Check a parsed JSON document and build the solution.

    ``from_store`` (used by :meth:`Solution.from_dict`) lets an emptied name or text pass: a stored study
    may hold a name that a researcher is still writing.
    """
    def err(msg):
        return SolutionImportError(msg, file=file)

    if not isinstance(doc, dict):
        raise err("a JSON solution must be an object with an \"items\" list")
    raw_items = doc.get("items")
    if not isinstance(raw_items, list) or not raw_items:
        raise err("a JSON solution needs a non-empty \"items\" list")
    has_text = any(isinstance(it, dict) and "text" in it for it in raw_items)
    notes: list[str] = []
    if not has_text:
        if require_text:
            raise err("no item has a \"text\": add the wording judges will read to every item")
        notes.append("no item text; texts must be added before judges can see the items "
                     "(the item ids stand in for now)")
    items: list[Item] = []
    loading_ids: list[str] | None = None
    seen: dict[str, int] = {}
    for k, it in enumerate(raw_items):
        where = f"items[{k}]"
        if not isinstance(it, dict):
            raise err(f"{where} must be an object")
        if "id" not in it:
            raise err(f"{where} has no \"id\"")
        item_id = _str(it["id"], f"{where}.id", err)
        if not item_id:
            raise err(f"{where} has an empty \"id\"")
        where = f"{where} (item {item_id!r})"
        if item_id.casefold() in seen:
            raise err(f"duplicate item id {item_id!r} (first used in items[{seen[item_id.casefold()]}])")
        seen[item_id.casefold()] = k
        if has_text:
            text = _str(it.get("text", ""), f"{where}.text", err) if it.get("text") is not None else ""
            if not text and not from_store:
                raise err(f"item {item_id!r} has no text; write the wording judges will read")
        else:
            text = item_id
        loadings = it.get("loadings")
        if not isinstance(loadings, dict) or not loadings:
            raise err(f"{where} needs \"loadings\": an object of factor id -> loading")
        ids = [_str(f, f"{where} factor id", err) for f in loadings]
        if any(not f for f in ids) or len(set(ids)) != len(ids):
            raise err(f"{where}: factor ids in \"loadings\" must be non-empty and distinct")
        if loading_ids is None:
            loading_ids = ids
            if len(ids) < 2:
                raise err(f"fewer than two factors: only {ids[0]!r}; labels can only be told apart with "
                          f"two or more factors")
        values = dict(zip(ids, loadings.values()))
        for f in loading_ids:
            if f not in values or values[f] is None or values[f] == "":
                raise err(missing_loading_message(item_id, f, False))
        extra = [f for f in ids if f not in loading_ids]
        if extra:
            raise err(f"{where} has loadings on {', '.join(extra)}, which the first item does not have")
        pairs = tuple((f, checked_loading(_number(values[f], f"the loading of item {item_id!r} on factor {f!r}",
                                                  err), item_id, f, err)) for f in loading_ids)
        reverse = it.get("reverse", it.get("reverse_keyed"))
        if reverse is not None:
            flag = parse_flag(reverse) if isinstance(reverse, (bool, int, float, str)) else None
            if flag is None:
                raise err(f"{where}: \"reverse\" must be true, false or null")
            reverse = flag
        extras = it.get("extras") or {}
        if not isinstance(extras, dict):
            raise err(f"{where}: \"extras\" must be an object")
        kept = tuple((_str(a, f"{where} extras key", err), _str(b, f"{where} extras value", err))
                     for a, b in extras.items())
        items.append(Item(item_id, text, pairs, reverse, kept))
    part = ItemsPart(file, items, list(loading_ids), [None] * len(items), notes)
    factors = _factors(doc.get("factors"), err, notes, lenient=from_store)
    phi = _phi(doc.get("phi"), file, err)
    meta = _meta(doc.get("meta"), file, err)
    return assemble(part, factors, file, phi, meta, file, [])


def _factors(raw, err, notes, lenient: bool = False) -> list[Factor] | None:
    if raw is None:
        return None
    if not isinstance(raw, list) or not raw:
        raise err("\"factors\" must be a non-empty list of {\"id\", \"name\", \"definition\"}")
    out, seen, undefined = [], set(), []
    for k, f in enumerate(raw):
        if not isinstance(f, dict):
            raise err(f"factors[{k}] must be an object")
        fid = _str(f.get("id", ""), f"factors[{k}].id", err)
        if not fid:
            raise err(f"factors[{k}] has no \"id\"")
        if fid in seen:
            raise err(f"factor {fid!r} is listed twice")
        seen.add(fid)
        name = _str(f.get("name") or "", f"factors[{k}].name", err)
        if not name and not lenient:
            raise err(f"factor {fid!r} has no name")
        definition = _str(f.get("definition") or "", f"factors[{k}].definition", err)
        if not definition:
            undefined.append(fid)
        out.append(Factor(fid, name, definition))
    if undefined:
        notes.append(f"factors without a definition (to be written): {', '.join(undefined)}")
    return out


def _phi(raw, file, err):
    if raw is None:
        return None
    if not isinstance(raw, dict):
        raise err("\"phi\" must be an object")
    if "matrix" in raw:
        ids, matrix = raw.get("factors"), raw.get("matrix")
        if not isinstance(ids, list) or not isinstance(matrix, list):
            raise err("\"phi\" needs \"factors\" (a list of ids) and \"matrix\" (a list of rows)")
        ids = [_str(f, "phi factor id", err) for f in ids]
        if len(set(ids)) != len(ids) or not all(ids):
            raise err("phi factor ids must be non-empty and distinct")
        if len(matrix) != len(ids) or any(not isinstance(r, list) or len(r) != len(ids) for r in matrix):
            raise err(f"phi is not square: it must have {len(ids)} rows of {len(ids)} values")
        cells = {(r, c): matrix[a][b] for a, r in enumerate(ids) for b, c in enumerate(ids)}
    else:
        ids = [_str(f, "phi factor id", err) for f in raw]
        if len(set(ids)) != len(ids) or not all(ids):
            raise err("phi factor ids must be non-empty and distinct")
        rows = dict(zip(ids, raw.values()))
        cells = {}
        for r in ids:
            if not isinstance(rows[r], dict):
                raise err(f"phi row {r!r} must be an object of factor id -> correlation")
            for c, v in rows[r].items():
                c = _str(c, "phi factor id", err)
                if c not in ids:
                    raise err(f"phi row {r!r} names {c!r}, which has no phi row of its own (phi is not square)")
                cells[(r, c)] = v
        for r in ids:
            cells.setdefault((r, r), 1.0)
    for key, v in cells.items():
        if v is not None and (isinstance(v, bool) or not isinstance(v, (int, float, str))):
            raise err(f"phi value for {key[0]}/{key[1]} is not numeric")
        if isinstance(v, (int, float)) and not isinstance(v, bool):
            cells[key] = _number(v, f"phi value for {key[0]}/{key[1]}", err)
    return check_phi(file, ids, cells, False, lambda r, c: (None, None))


def _meta(raw, file, err) -> dict[str, str]:
    if raw is None:
        return {}
    if not isinstance(raw, dict):
        raise err("\"meta\" must be an object of key -> value")
    pairs = []
    for k, v in raw.items():
        if v is not None and (isinstance(v, (dict, list))):
            raise err(f"meta value for {k!r} must be text or a number")
        pairs.append((str(k), "" if v is None else cell_text(v), None))
    return meta_from_pairs(file, pairs)
