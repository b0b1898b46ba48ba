"""The imported EFA solution: items with loadings, factors with names and definitions, factor correlations.

All three records are frozen; tuples keep the order of the file. Factor order is the order of the factors
table when there is one, else the order of the loading columns; every item's loadings and the rows and
columns of ``phi`` follow it.
"""

from __future__ import annotations

from dataclasses import dataclass

import pandas as pd

__all__ = ["Item", "Factor", "Solution", "FORMAT_NAME", "FORMAT_VERSION"]

FORMAT_NAME = "labelstudy-solution"
FORMAT_VERSION = 1


@dataclass(frozen=True)
class Item:
    """One item (variable) of the analysed scale.

    Attributes
    ----------
    id : str
        Item id as written in the first column of the items table.
    text : str
        Wording shown to judges.
    loadings : tuple of (str, float)
        ``(factor_id, loading)`` pairs in factor order.
    reverse_keyed : bool or None
        Whether the item is declared reverse keyed; ``None`` when the file does not say.
    extras : tuple of (str, str)
        Recognised extra columns kept as text (communality, uniqueness, complexity, comment, note).
    """

    id: str
    text: str
    loadings: tuple[tuple[str, float], ...]
    reverse_keyed: bool | None
    extras: tuple[tuple[str, str], ...] = ()

    def loading(self, factor_id: str) -> float:
        """The loading on ``factor_id``; ``KeyError`` when there is no such factor."""
        for fid, value in self.loadings:
            if fid == factor_id:
                return value
        raise KeyError(f"item {self.id!r} has no loading on factor {factor_id!r}")


@dataclass(frozen=True)
class Factor:
    """One factor: the id used in loading columns, its proposed name and its definition."""

    id: str
    name: str
    definition: str


@dataclass(frozen=True)
class Solution:
    """An imported factor solution.

    Attributes
    ----------
    items, factors : tuple
        :class:`Item` and :class:`Factor` records in file order / factor order.
    phi : tuple of tuple of float, or None
        Factor correlation matrix in factor order; ``None`` when none was supplied.
    meta : tuple of (str, str)
        Keys (lower case: ``extraction``, ``rotation``, ``n`` ...) and values as text.
    source : str
        Where the solution came from (a path or an upload's name).
    notes : tuple of str
        What the importer assumed or filled in, in words.
    """

    items: tuple[Item, ...]
    factors: tuple[Factor, ...]
    phi: tuple[tuple[float, ...], ...] | None
    meta: tuple[tuple[str, str], ...]
    source: str
    notes: tuple[str, ...] = ()

    @property
    def factor_ids(self) -> tuple[str, ...]:
        """Factor ids in factor order."""
        return tuple(f.id for f in self.factors)

    def loadings_frame(self) -> pd.DataFrame:
        """Items x factors table of loadings (index ``item``, one float column per factor id)."""
        ids = list(self.factor_ids)
        frame = pd.DataFrame([[it.loading(f) for f in ids] for it in self.items],
                             index=pd.Index([it.id for it in self.items], name="item"),
                             columns=pd.Index(ids, name="factor"), dtype=float)
        return frame

    def phi_frame(self) -> pd.DataFrame | None:
        """The factor correlation matrix labelled by factor ids, or ``None``."""
        if self.phi is None:
            return None
        ids = list(self.factor_ids)
        return pd.DataFrame([list(r) for r in self.phi], index=pd.Index(ids, name="factor"),
                            columns=pd.Index(ids, name="factor"), dtype=float)

    def factor(self, id: str) -> Factor:
        """The factor with this id; ``KeyError`` when absent."""
        for f in self.factors:
            if f.id == id:
                return f
        raise KeyError(f"no factor {id!r} in this solution")

    def item(self, id: str) -> Item:
        """The item with this id; ``KeyError`` when absent."""
        for it in self.items:
            if it.id == id:
                return it
        raise KeyError(f"no item {id!r} in this solution")

    def meta_value(self, key: str, default: str | None = None) -> str | None:
        """The metadata value for ``key`` (lower case), or ``default``."""
        return dict(self.meta).get(key, default)

    def to_dict(self) -> dict:
        """JSON-ready form; it is also a valid JSON solution file, and :meth:`from_dict` restores an equal
        :class:`Solution`."""
        ids = list(self.factor_ids)
        return {
            "format": FORMAT_NAME,
            "version": FORMAT_VERSION,
            "source": self.source,
            "items": [{"id": it.id, "text": it.text, "loadings": dict(it.loadings),
                       "reverse": it.reverse_keyed, "extras": dict(it.extras)} for it in self.items],
            "factors": [{"id": f.id, "name": f.name, "definition": f.definition} for f in self.factors],
            "phi": None if self.phi is None else {"factors": ids, "matrix": [list(r) for r in self.phi]},
            "meta": dict(self.meta),
            "notes": list(self.notes),
        }

    @classmethod
    def from_dict(cls, d: dict) -> "Solution":
        """Rebuild a solution from :meth:`to_dict` output, checking it like a JSON file.

        Raises
        ------
        SolutionImportError
            When ``d`` is not a valid solution.
        """
        from labelstudy.solution._json import solution_from_mapping

        source = str(d.get("source", "")) if isinstance(d, dict) else ""
        sol = solution_from_mapping(d, source or "stored solution", require_text=False, from_store=True)
        notes = d.get("notes", [])
        return cls(sol.items, sol.factors, sol.phi, sol.meta, source,
                   tuple(str(n) for n in notes) if isinstance(notes, list) else ())
