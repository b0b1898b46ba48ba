"""Shared helpers for result objects: JSON-ready dictionaries and short, readable one-line reprs.

Every result of :mod:`labelstudy.agreement` is a frozen dataclass. ``to_dict()`` turns it into plain Python
values (floats, ints, strings, lists, dicts) with NaN written as ``None`` so that ``json.dumps`` accepts it.
"""

from __future__ import annotations

import dataclasses
import math
from typing import Any

import numpy as np
import pandas as pd

__all__ = ["ResultMixin", "fmt", "fmt_ci", "json_ready"]


def json_ready(value: Any) -> Any:
    """Convert numpy / pandas values into JSON-ready Python values; NaN and infinities become ``None``.

    >>> json_ready({"a": np.float64("nan"), "b": np.int64(3), "c": pd.Series([0.5], index=[2])})
    {'a': None, 'b': 3, 'c': {'2': 0.5}}
    """
    if value is None or isinstance(value, (str, bool)):
        return value
    if isinstance(value, np.bool_):
        return bool(value)
    if isinstance(value, (int, np.integer)):
        return int(value)
    if isinstance(value, (float, np.floating)):
        v = float(value)
        return v if math.isfinite(v) else None
    if isinstance(value, pd.Series):
        return {_key(k): json_ready(v) for k, v in value.items()}
    if isinstance(value, pd.DataFrame):
        return {_key(c): {_key(k): json_ready(v) for k, v in value[c].items()} for c in value.columns}
    if isinstance(value, np.ndarray):
        return [json_ready(v) for v in value.tolist()]
    if isinstance(value, dict):
        return {_key(k): json_ready(v) for k, v in value.items()}
    if isinstance(value, (list, tuple)):
        return [json_ready(v) for v in value]
    return str(value)


def _key(k: Any) -> str:
    if isinstance(k, (float, np.floating)) and float(k).is_integer():
        return str(int(k))
    return str(k)


def fmt(value: float, digits: int = 3) -> str:
    """A number for a one-line summary: ``nan`` when undefined.

    >>> fmt(0.7434), fmt(float("nan"))
    ('0.743', 'nan')
    """
    if value is None or not math.isfinite(float(value)):
        return "nan"
    return f"{float(value):.{digits}f}"


def _short(value: float) -> str:
    text = f"{value:.2f}"
    if text.startswith("0."):
        return text[1:]
    if text.startswith("-0."):
        return "-" + text[2:]
    return text


def fmt_ci(low: float, high: float, ci: float) -> str:
    """``95% CI [.61, .85]`` style interval text, or an empty string when the interval is undefined.

    >>> fmt_ci(0.612, 0.851, 0.95)
    '95% CI [.61, .85]'
    """
    if not (math.isfinite(low) and math.isfinite(high)):
        return ""
    return f"{ci * 100:g}% CI [{_short(low)}, {_short(high)}]"


class ResultMixin:
    """``to_dict()`` for frozen dataclass results."""

    def to_dict(self) -> dict:
        """The result's fields as JSON-ready values (NaN -> None)."""
        return {f.name: json_ready(getattr(self, f.name)) for f in dataclasses.fields(self)}
