"""Content-validity indices from relevance ratings: I-CVI, S-CVI, modified kappa, Lawshe's CVR.

Data convention: ``ratings`` is judges x items (rows judges, columns items), numeric codes, NaN = no answer.
Relevance is on the 4-point scale (1 not relevant, 2 somewhat, 3 quite, 4 highly relevant) unless
``relevant`` says otherwise; Lawshe's ratings are on the 3-point scale coded 3 essential, 2 useful but not
essential, 1 not necessary.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Any, Iterable

import numpy as np
import pandas as pd
from scipy.special import comb

from labelstudy.agreement._data import AgreementInputError, as_matrix
from labelstudy.agreement.itemsort import _ToDict, critical_count

__all__ = ["item_cvi", "scale_cvi", "ScaleCVI", "modified_kappa", "kappa_star_band", "icvi_standard",
           "meets_icvi_standard",
           "lawshe_cvr", "cvr_critical", "LAWSHE_1975_MINIMA"]

#: Lawshe's (1975) minimum CVR values by panel size, one-tailed p = .05. Shown only as history: they are not
#: exact binomial critical values for N >= 10 (Ayre & Scally 2014); use :func:`cvr_critical`.
#: [values as recalled, not confirmed against the 1975 table]
LAWSHE_1975_MINIMA: dict[int, float] = {5: 0.99, 6: 0.99, 7: 0.99, 8: 0.75, 9: 0.78, 10: 0.62, 15: 0.49,
                                        20: 0.42, 40: 0.29}


def _relevant_counts(ratings: Any, relevant: Iterable[float], name: str = "ratings"):
    m = as_matrix(ratings, name=name)
    rel = np.asarray(list(relevant), dtype=float)
    if rel.size == 0:
        raise AgreementInputError(f"{name}: 'relevant' must list at least one rating code")
    present = ~np.isnan(m.values)
    n = present.sum(axis=0)
    agree = (np.isin(m.values, rel) & present).sum(axis=0)
    return m, n, agree


def item_cvi(ratings: Any, *, relevant: Iterable[float] = (3, 4)) -> pd.Series:
    """Item-level content validity index: I-CVI = A / N, the share of the item's N non-missing ratings that
    fall in ``relevant`` (3 or 4 on the 4-point relevance scale).

    Reference: Lynn, M. R. (1986). Determination and quantification of content validity. Nursing Research,
    35, 382-385; Polit, D. F. & Beck, C. T. (2006). The content validity index: are you sure you know what's
    being reported? Research in Nursing & Health, 29, 489-497.

    Interpretation: compare with :func:`icvi_standard` (1.00 with 5 or fewer judges, .78 with 6 or more).
    Items nobody rated get NaN. Validated by hand counts and the modified-kappa rows of Polit, Beck & Owen.

    >>> item_cvi([[4, 2], [3, 3], [1, 4]]).round(3).tolist()
    [0.667, 0.667]
    """
    m, n, agree = _relevant_counts(ratings, relevant)
    with np.errstate(invalid="ignore", divide="ignore"):
        val = np.where(n > 0, agree / np.maximum(n, 1), np.nan)
    return pd.Series(val, index=pd.Index(m.items, name="item"), name="i_cvi")


@dataclass(frozen=True)
class ScaleCVI(_ToDict):
    """Scale-level CVI: ``ave`` = mean I-CVI, ``ua`` = share of items with I-CVI = 1 (universal agreement)."""

    ave: float
    ua: float
    n_items: int
    note: str = ""


def scale_cvi(ratings: Any, *, relevant: Iterable[float] = (3, 4)) -> ScaleCVI:
    """Scale-level content validity index, both versions (Polit & Beck 2006).

    S-CVI/Ave = mean over items of I-CVI; S-CVI/UA = share of items that every judge who rated them rated
    relevant (I-CVI = 1). Items nobody rated are left out (``n_items`` counts the rest). A common standard is
    S-CVI/Ave >= .90 (Polit & Beck 2006) [wording from memory]. UA falls as judges are added, so report Ave.

    Reference: Polit, D. F. & Beck, C. T. (2006), Research in Nursing & Health, 29, 489-497.
    Validated by hand-computed examples in the tests.

    >>> r = scale_cvi([[4, 2, 3], [3, 3, 4], [4, 4, 4]])
    >>> round(r.ave, 3), round(r.ua, 3), r.n_items
    (0.889, 0.667, 3)
    """
    icvi = item_cvi(ratings, relevant=relevant).dropna()
    if icvi.empty:
        return ScaleCVI(float("nan"), float("nan"), 0, "no item has a rating: the S-CVI is undefined")
    return ScaleCVI(float(icvi.mean()), float((icvi == 1.0).mean()), int(icvi.size))


def kappa_star_band(kappa_star: float) -> str | None:
    """Band of a modified kappa, from the unrounded value: excellent k* > .74, good .60 <= k* <= .74,
    fair .40 <= k* < .60, poor below .40 (Cicchetti & Sparrow 1981, as applied by Polit, Beck & Owen 2007).

    >>> kappa_star_band(0.7627), kappa_star_band(0.74), kappa_star_band(0.3999)
    ('excellent', 'good', 'poor')
    """
    if kappa_star is None or math.isnan(kappa_star):
        return None
    if kappa_star > 0.74:
        return "excellent"
    if kappa_star >= 0.60:
        return "good"
    if kappa_star >= 0.40:
        return "fair"
    return "poor"


def modified_kappa(ratings: Any, *, relevant: Iterable[float] = (3, 4)) -> pd.DataFrame:
    """I-CVI adjusted for chance agreement: the modified kappa of Polit, Beck & Owen (2007).

    With N judges rating the item and A of them rating it relevant::

        p_c = C(N, A) * 0.5**N            (probability of exactly A "relevant" answers by chance)
        k*  = (I-CVI - p_c) / (1 - p_c)

    Columns: n, agree, i_cvi, p_c, kappa_star, band (:func:`kappa_star_band`, computed from the unrounded
    k*). Items nobody rated get NaN.

    Reference: Polit, D. F., Beck, C. T. & Owen, S. V. (2007). Is the CVI an acceptable indicator of content
    validity? Appraisal and recommendations. Research in Nursing & Health, 30, 459-467. Bands: Cicchetti, D.
    V. & Sparrow, S. (1981), American Journal of Mental Deficiency, 86, 127-137.

    Validated against the (N, A) rows of Polit, Beck & Owen's table, e.g. 5, 4 -> .80, .156, .76.

    >>> t = modified_kappa([[4], [4], [3], [4], [1]])
    >>> t[["i_cvi", "p_c", "kappa_star"]].round(3).iloc[0].tolist(), t["band"].iloc[0]
    ([0.8, 0.156, 0.763], 'excellent')
    """
    m, n, agree = _relevant_counts(ratings, relevant)
    with np.errstate(invalid="ignore", divide="ignore"):
        icvi = np.where(n > 0, agree / np.maximum(n, 1), np.nan)
        p_c = np.where(n > 0, comb(n, agree) * 0.5 ** n, np.nan)
        kstar = (icvi - p_c) / (1 - p_c)
    out = pd.DataFrame({"n": n, "agree": agree, "i_cvi": icvi, "p_c": p_c, "kappa_star": kstar,
                        "band": [kappa_star_band(k) for k in kstar]},
                       index=pd.Index(m.items, name="item"))
    return out


def icvi_standard(n_judges: int) -> float:
    """The I-CVI an item should reach: 1.00 with 5 or fewer judges, .78 with 6 or more (Lynn 1986, as
    summarised by Polit & Beck 2006) [exact wording from memory].

    >>> icvi_standard(5), icvi_standard(6)
    (1.0, 0.78)
    """
    if int(n_judges) != n_judges or n_judges < 1:
        raise AgreementInputError(f"the number of judges must be a whole number >= 1, got {n_judges}")
    return 1.0 if n_judges <= 5 else 0.78


def meets_icvi_standard(i_cvi: float, standard: float) -> bool:
    """Whether an I-CVI meets its standard, compared at the two decimals the standard is printed with.

    The .78 standard is Lynn's (1986) 7 agreeing judges out of 9 (7/9 = .7778, printed .78; Polit, Beck &
    Owen 2007 list N = 9, A = 7 with I-CVI .78 as meeting it), so the I-CVI is rounded half up to two
    decimals before the comparison; compared unrounded, the very panel the standard was derived from would
    fail it. NaN never meets a standard.

    >>> meets_icvi_standard(7 / 9, 0.78), meets_icvi_standard(0.75, 0.78), meets_icvi_standard(5 / 6, 1.0)
    (True, False, False)
    """
    value = float(i_cvi)
    if math.isnan(value) or math.isnan(float(standard)):
        return False
    return math.floor(value * 100 + 0.5 + 1e-9) / 100 >= float(standard) - 1e-12


def cvr_critical(n: int, *, alpha: float = 0.05) -> tuple[int | None, float]:
    """Critical value of Lawshe's CVR for a panel of ``n`` judges, computed exactly.

    n_e = the smallest number of "essential" ratings with P(X >= n_e | n, 0.5) < alpha (one-tailed exact
    binomial), and CVR = (n_e - n/2) / (n/2). Returns ``(None, nan)`` when even unanimity is not
    significant (n <= 4 at alpha = .05).

    Reference: Ayre, C. & Scally, A. J. (2014). Critical values for Lawshe's content validity ratio:
    revisiting the original methods of calculation. Measurement and Evaluation in Counseling and
    Development, 47, 79-86.

    Validated against the exact table (5: 5, 8: 7, 10: 9, 20: 15, 40: 26).

    >>> cvr_critical(10)
    (9, 0.8)
    """
    if int(n) != n or n < 1:
        raise AgreementInputError(f"the number of judges must be a whole number >= 1, got {n}")
    n_e = critical_count(int(n), p0=0.5, alpha=alpha)
    if n_e is None:
        return None, float("nan")
    return n_e, (n_e - n / 2) / (n / 2)


def lawshe_cvr(ratings: Any, *, essential: float = 3, alpha: float = 0.05) -> pd.DataFrame:
    """Lawshe's content validity ratio per item, with exact critical values.

    CVR = (n_e - N/2) / (N/2), N = judges who rated the item, n_e = those rating it ``essential`` (our
    store codes 3 essential, 2 useful but not essential, 1 not necessary). ``critical`` is the critical CVR
    for that N and ``critical_n_essential`` its count (:func:`cvr_critical`); ``meets`` is n_e >= that
    count. CVR runs from -1 (nobody) to +1 (everybody).

    Reference: Lawshe, C. H. (1975). A quantitative approach to content validity. Personnel Psychology, 28,
    563-575; critical values after Ayre & Scally (2014). :data:`LAWSHE_1975_MINIMA` holds the historical
    table for comparison only.

    Validated by hand computation and the exact critical values of Ayre & Scally (2014).

    >>> t = lawshe_cvr([[3, 3], [3, 2], [3, 1], [3, 3], [3, 3]])
    >>> t[["cvr", "critical", "meets"]].values.tolist()
    [[1.0, 1.0, True], [0.2, 1.0, False]]
    """
    m = as_matrix(ratings, name="ratings")
    present = ~np.isnan(m.values)
    n = present.sum(axis=0)
    n_e = ((m.values == float(essential)) & present).sum(axis=0)
    crit = {int(k): cvr_critical(int(k), alpha=alpha) for k in set(n.tolist()) if k > 0}
    with np.errstate(invalid="ignore", divide="ignore"):
        cvr = np.where(n > 0, (n_e - n / 2) / np.maximum(n / 2, 0.5), np.nan)
    crit_n = [crit[k][0] if k > 0 else None for k in n]
    out = pd.DataFrame({
        "n": n, "n_essential": n_e, "cvr": cvr,
        "critical": [crit[k][1] if k > 0 else np.nan for k in n],
        "critical_n_essential": pd.array(crit_n, dtype="Int64"),
        "meets": [bool(c is not None and e >= c) for e, c in zip(n_e, crit_n)],
    }, index=pd.Index(m.items, name="item"))
    small = sorted({int(k) for k, c in zip(n, crit_n) if c is None})
    out.attrs["note"] = (f"with {', '.join(map(str, small))} judge(s) no CVR can be significant at "
                         f"alpha = {alpha:g}" if small else "")
    return out
