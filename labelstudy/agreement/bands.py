"""Interpretation bands: words for a coefficient, with the published scale they come from.

Bands are applied to **unrounded** values: a kappa of 0.2004 is "slight" (it is <= .20 before rounding)
even though it prints as .20. ``BANDS`` describes every scale (reference, edges, words) so a report can
print the table it used.
"""

from __future__ import annotations

import math

from labelstudy.agreement._data import AgreementInputError

__all__ = ["BANDS", "band"]

# Each scale: ordered (upper edge, inclusive?, word) rows; the first row whose test passes wins.
BANDS: dict[str, dict] = {
    "landis_koch": {
        "reference": "Landis, J. R. & Koch, G. G. (1977). The measurement of observer agreement for "
                     "categorical data. Biometrics, 33, 159-174.",
        "rule": "< 0 poor; 0-.20 slight; .21-.40 fair; .41-.60 moderate; .61-.80 substantial; "
                ".81-1 almost perfect. Edges on unrounded values: < 0 poor, <= .20 slight, <= .40 fair, "
                "<= .60 moderate, <= .80 substantial, otherwise almost perfect.",
        "rows": [(0.0, False, "poor"), (0.20, True, "slight"), (0.40, True, "fair"),
                 (0.60, True, "moderate"), (0.80, True, "substantial"), (math.inf, True, "almost perfect")],
    },
    "krippendorff": {
        "reference": "Krippendorff, K. (2004). Content analysis: An introduction to its methodology "
                     "(2nd ed.). Sage. [thresholds recalled from memory]",
        "rule": "alpha >= .800 reliable; .667 <= alpha < .800 tentative conclusions only; "
                "alpha < .667 unreliable.",
        "rows": [(0.667, False, "unreliable"), (0.800, False, "tentative conclusions only"),
                 (math.inf, True, "reliable")],
    },
    "cicchetti_sparrow": {
        "reference": "Cicchetti, D. V. & Sparrow, S. A. (1981), as applied to the modified kappa of "
                     "content validity by Polit, D. F., Beck, C. T. & Owen, S. V. (2007). Is the CVI an "
                     "acceptable indicator of content validity? Research in Nursing & Health, 30, 459-467.",
        "rule": "< .40 poor; .40-.59 fair; .60-.74 good; > .74 excellent. Edges on unrounded values: "
                "< .40 poor, < .60 fair, <= .74 good, otherwise (> .74, the paper's wording) excellent.",
        "rows": [(0.40, False, "poor"), (0.60, False, "fair"), (0.74, True, "good"),
                 (math.inf, True, "excellent")],
    },
}


def band(value: float, scale: str = "landis_koch") -> str:
    """The word for ``value`` on ``scale`` ("landis_koch", "krippendorff" or "cicchetti_sparrow").

    Edges are applied to the unrounded value (see ``BANDS[scale]["rule"]``); NaN gives "undefined".

    >>> band(0.2), band(0.2001), band(-0.1), band(0.95)
    ('slight', 'fair', 'poor', 'almost perfect')
    >>> band(0.7999, "krippendorff"), band(0.8, "krippendorff")
    ('tentative conclusions only', 'reliable')
    >>> band(0.74, "cicchetti_sparrow"), band(0.7401, "cicchetti_sparrow")
    ('good', 'excellent')
    >>> band(float("nan"))
    'undefined'
    """
    if scale not in BANDS:
        raise AgreementInputError(f"unknown band scale {scale!r}; choose one of {', '.join(BANDS)}")
    if value is None:
        return "undefined"
    try:
        value = float(value)
    except (TypeError, ValueError):
        raise AgreementInputError(f"band: {value!r} is not a number") from None
    if not math.isfinite(value):
        return "undefined"
    for edge, inclusive, word in BANDS[scale]["rows"]:
        if value < edge or (inclusive and value == edge):
            return word
    return BANDS[scale]["rows"][-1][2]
