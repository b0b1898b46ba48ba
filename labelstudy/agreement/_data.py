"""Shaping reliability data: judges x items matrices and category domains.

Convention (used by every function in :mod:`labelstudy.agreement`): reliability data is a 2-D array or
DataFrame with **judges in rows and items (units) in columns**; NaN marks a missing answer. A transposed
matrix silently gives another number, so every public function goes through :func:`as_matrix`, and
long-format answers go through :func:`from_long`, which names its axes.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any, Sequence

import numpy as np
import pandas as pd

from labelstudy.errors import LabelstudyError


class AgreementInputError(LabelstudyError, ValueError):
    """Reliability data of the wrong shape or with codes outside the declared domain."""


@dataclass(frozen=True)
class Matrix:
    """Judges x items data as floats (NaN = missing) with its labels."""

    values: np.ndarray          # shape (n_judges, n_items), float
    judges: tuple               # row labels
    items: tuple                # column labels

    @property
    def shape(self) -> tuple[int, int]:
        return self.values.shape


def as_matrix(data: Any, *, name: str = "data") -> Matrix:
    """Return ``data`` (judges x items) as a :class:`Matrix` of floats.

    Accepts a 2-D numpy array, a DataFrame (judges as index, items as columns) or a list of equal-length
    rows. Raises :class:`AgreementInputError` for ragged rows, a wrong number of dimensions or values that
    are not numbers.

    >>> as_matrix([[1, 2], [1, None]]).shape
    (2, 2)
    """
    if isinstance(data, Matrix):
        return data
    if isinstance(data, pd.DataFrame):
        judges, items = tuple(data.index), tuple(data.columns)
        try:
            values = data.apply(pd.to_numeric, errors="raise").to_numpy(dtype=float, na_value=np.nan)
        except (ValueError, TypeError) as exc:
            raise AgreementInputError(f"{name}: every answer must be a number or missing ({exc})") from None
    else:
        if isinstance(data, (list, tuple)) and data and isinstance(data[0], (list, tuple, np.ndarray)):
            lengths = {len(r) for r in data}
            if len(lengths) > 1:
                raise AgreementInputError(
                    f"{name}: rows have different lengths {sorted(lengths)}; every judge needs one entry "
                    "per item (use NaN for no answer)")
        try:
            values = np.array(
                [[np.nan if v is None else v for v in row] for row in data]
                if isinstance(data, (list, tuple)) else data, dtype=float)
        except (ValueError, TypeError) as exc:
            raise AgreementInputError(f"{name}: every answer must be a number or missing ({exc})") from None
        if values.ndim != 2:
            raise AgreementInputError(
                f"{name}: expected a 2-D judges x items table, got {values.ndim} dimension(s)")
        judges, items = tuple(range(values.shape[0])), tuple(range(values.shape[1]))
    if values.ndim != 2:
        raise AgreementInputError(f"{name}: expected a 2-D judges x items table")
    if np.isinf(values).any():
        raise AgreementInputError(f"{name}: infinite values are not answers")
    return Matrix(values=values, judges=judges, items=items)


def resolve_domain(values: np.ndarray, domain: Sequence | None, *, name: str = "data") -> np.ndarray:
    """The category codes offered, sorted. Observed codes outside ``domain`` raise AgreementInputError.

    >>> resolve_domain(np.array([[1., 3.], [np.nan, 1.]]), None).tolist()
    [1.0, 3.0]
    """
    observed = np.unique(values[~np.isnan(values)])
    if domain is None:
        return observed
    dom = np.asarray(sorted(float(d) for d in domain), dtype=float)
    if len(np.unique(dom)) != len(dom):
        raise AgreementInputError(f"{name}: the domain lists a code twice")
    unknown = np.setdiff1d(observed, dom)
    if unknown.size:
        shown = ", ".join(f"{u:g}" for u in unknown[:5])
        raise AgreementInputError(
            f"{name}: code(s) {shown} are not in the declared domain {[f'{d:g}' for d in dom]}")
    return dom


def from_long(df: pd.DataFrame, *, judge: str = "judge", item: str = "item",
              value: str = "value") -> pd.DataFrame:
    """Pivot long-format answers (one row per judge x item) into a judges x items DataFrame.

    Duplicate (judge, item) rows are refused: they would otherwise be silently averaged.

    >>> long = pd.DataFrame({"judge": ["a", "a", "b"], "item": ["q1", "q2", "q1"], "value": [1, 2, 1]})
    >>> from_long(long).loc["b", "q2"]
    nan
    """
    for col in (judge, item, value):
        if col not in df.columns:
            raise AgreementInputError(f"long-format data has no column {col!r} (columns: {list(df.columns)})")
    dup = df.duplicated([judge, item], keep=False)
    if dup.any():
        first = df.loc[dup, [judge, item]].iloc[0]
        raise AgreementInputError(
            f"judge {first[judge]!r} has more than one answer for item {first[item]!r}")
    wide = df.pivot(index=judge, columns=item, values=value)
    wide.index.name, wide.columns.name = "judge", "item"
    return wide
