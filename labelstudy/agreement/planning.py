"""Planning a judge panel: what a given number of judges and items can and cannot establish."""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
from scipy import stats

from labelstudy.agreement._data import AgreementInputError
from labelstudy.agreement._results import fmt
from labelstudy.agreement.cvi import cvr_critical, icvi_standard, meets_icvi_standard
from labelstudy.agreement.itemsort import _ToDict, critical_count

__all__ = ["plan_panel", "PanelPlan", "simulate_sort_counts", "nominal_alpha_counts"]


@dataclass(frozen=True)
class PanelPlan(_ToDict):
    """Thresholds and simulated precision for a planned panel; ``messages`` says it in plain sentences.

    ``csv_critical`` = (smallest n_c significant with p0 = .5, with p0 = 1/k), k = n_factors + 1 labels
    offered ("none fits" included); None where no count is significant.
    """

    n_judges: int
    n_items: int
    n_factors: int
    expected_hit_rate: float
    cvr_critical: tuple
    csv_critical: tuple
    icvi_standard: float
    min_icvi_agreements: int
    expected_share_significant: float
    expected_alpha: float
    expected_alpha_ci_width: float
    n_sim: int
    n_boot: int
    messages: tuple
    note: str = ""

    def __repr__(self) -> str:
        return (f"PanelPlan(judges={self.n_judges}, items={self.n_items}, factors={self.n_factors}: "
                f"csv needs {self.csv_critical[0]}, CVR needs {self.cvr_critical[0]}, I-CVI needs "
                f"{self.min_icvi_agreements}; alpha ~{fmt(self.expected_alpha, 2)}, 95% CI width "
                f"~{fmt(self.expected_alpha_ci_width, 2)})")


def simulate_sort_counts(n_judges: int, n_items: int, n_factors: int, hit_rate: float, n_sim: int,
                         rng: np.random.Generator) -> np.ndarray:
    """(n_sim, n_items, n_factors + 1) answer counts of simulated item-sort panels.

    Item i is intended for factor i mod n_factors; each judge places it there with probability
    ``hit_rate``, otherwise uniformly on one of the other n_factors labels (the other factors and "none",
    code n_factors).
    """
    k = n_factors + 1
    intended = np.arange(n_items) % n_factors
    hit = rng.random((n_sim, n_judges, n_items)) < hit_rate
    shift = 1 + rng.integers(0, k - 1, size=(n_sim, n_judges, n_items))
    codes = np.where(hit, intended, (intended + shift) % k)
    counts = np.zeros((n_sim, n_items, k))
    for c in range(k):
        counts[:, :, c] = (codes == c).sum(axis=1)
    return counts


def nominal_alpha_counts(counts: np.ndarray, weights: np.ndarray | None = None) -> np.ndarray:
    """Nominal Krippendorff alpha from per-item answer counts, for many panels and replicates at once.

    ``counts``: (..., n_items, K) answers per item and category; ``weights``: (..., B, n_items) how often
    each item enters replicate b (None = each once). With per-item disagreement
    d_u = (m_u^2 - sum_c n_uc^2) / (m_u - 1) (the off-diagonal coincidences of item u, Krippendorff 2011)
    and marginals n_c = sum_u n_uc, n = sum_c n_c::

        alpha = 1 - (n - 1) * sum_u d_u / (n^2 - sum_c n_c^2)

    Items with fewer than two answers contribute nothing; NaN without variation. Validated against the
    package's :func:`~labelstudy.agreement.alpha.krippendorff_alpha` (point and units bootstrap).

    >>> round(float(nominal_alpha_counts(np.array([[2., 0.], [0., 2.], [1., 1.]]))), 4)
    0.4444
    """
    counts = np.asarray(counts, dtype=float)
    m = counts.sum(axis=-1)
    pairable = m >= 2
    with np.errstate(invalid="ignore", divide="ignore"):
        d = np.where(pairable, (m ** 2 - (counts ** 2).sum(axis=-1)) / np.where(pairable, m - 1, 1), 0.0)
    cnt = np.where(pairable[..., None], counts, 0.0)
    if weights is None:
        D, nc = d.sum(axis=-1), cnt.sum(axis=-2)
    else:
        D = np.einsum("...bi,...i->...b", weights, d)
        nc = np.einsum("...bi,...ik->...bk", weights, cnt)
    n = nc.sum(axis=-1)
    De = n ** 2 - (nc ** 2).sum(axis=-1)
    with np.errstate(invalid="ignore", divide="ignore"):
        return np.where(De > 0, 1 - (n - 1) * D / np.where(De > 0, De, 1), np.nan)


def _ci_widths(counts: np.ndarray, n_boot: int, rng: np.random.Generator, ci: float = 0.95,
               chunk: int = 50) -> np.ndarray:
    """Percentile units-bootstrap interval width of nominal alpha for each simulated panel."""
    n_sim, n_items, _ = counts.shape
    tail = (1 - ci) / 2 * 100
    out = np.empty(n_sim)
    for start in range(0, n_sim, chunk):
        part = counts[start:start + chunk]
        s = part.shape[0]
        idx = rng.integers(0, n_items, size=(s, n_boot, n_items))
        flat = (idx + (np.arange(s * n_boot) * n_items).reshape(s, n_boot, 1)).ravel()
        w = np.bincount(flat, minlength=s * n_boot * n_items).reshape(s, n_boot, n_items).astype(float)
        reps = nominal_alpha_counts(part, w)
        for p, row in enumerate(reps):          # per panel: a panel whose replicates are all NaN gives NaN
            fin = row[np.isfinite(row)]
            if fin.size:
                lo, hi = np.percentile(fin, [tail, 100 - tail])
                out[start + p] = hi - lo
            else:
                out[start + p] = np.nan
    return out


def plan_panel(n_judges: int, n_items: int, n_factors: int, *, expected_hit_rate: float = 0.8,
               n_sim: int = 500, n_boot: int = 200, seed: int | None = None) -> PanelPlan:
    """What a panel of ``n_judges`` judges sorting ``n_items`` items onto ``n_factors`` factors can show.

    - ``cvr_critical``: Lawshe's critical (n_e, CVR) for N judges, exact binomial (Ayre & Scally 2014);
    - ``csv_critical``: smallest n_c with a significant item-sort test at .05, p0 = .5 (Anderson & Gerbing
      1991) and p0 = 1/k (Howard & Melloy 2016), k = n_factors + 1;
    - ``icvi_standard`` (1.00 with N <= 5, else .78; Polit & Beck 2006) and ``min_icvi_agreements``, the
      judges who must rate an item 3 or 4 to reach it: smallest A with A / N >= standard;
    - ``expected_share_significant``: P(n_c >= critical) when each judge is right with probability
      ``expected_hit_rate`` (Binomial(N, hit rate); ignores the rival count);
    - ``expected_alpha`` and ``expected_alpha_ci_width``: by simulation (our design): judges place each item
      on its intended factor with probability ``expected_hit_rate``, else uniformly on another factor or
      "none"; per simulated panel nominal alpha and its 95% units-bootstrap percentile interval (``n_boot``
      resamples of items), averaged over ``n_sim`` panels. Seeded with numpy ``default_rng(seed)``. With
      a single item there is nothing to resample: the width is NaN (with a note) and no interval message.

    Validated: thresholds against the published check values of each source; the vectorised simulation
    alpha against :func:`~labelstudy.agreement.alpha.krippendorff_alpha` on the same resamples.

    >>> p = plan_panel(10, 12, 3, n_sim=20, seed=1)
    >>> p.cvr_critical, p.csv_critical, p.min_icvi_agreements
    ((9, 0.8), (9, 6), 8)
    >>> p.messages[1]
    'An item needs at least 9 of 10 judges placing it on its intended factor for a significant csv at .05 (p0 = .5).'
    """
    for name, v, lo in (("n_judges", n_judges, 2), ("n_items", n_items, 1), ("n_factors", n_factors, 1),
                        ("n_sim", n_sim, 1), ("n_boot", n_boot, 1)):
        if int(v) != v or v < lo:
            raise AgreementInputError(f"{name} must be a whole number >= {lo}, got {v}")
    if not 0 <= expected_hit_rate <= 1:
        raise AgreementInputError(f"expected_hit_rate must lie between 0 and 1, got {expected_hit_rate}")
    N, k = int(n_judges), int(n_factors) + 1
    cvr = cvr_critical(N)
    csv = (critical_count(N, p0=0.5), critical_count(N, p0=1 / k))
    std = icvi_standard(N)
    min_agree = next(a for a in range(N + 1) if meets_icvi_standard(a / N, std))
    share = float(stats.binom.sf(csv[0] - 1, N, expected_hit_rate)) if csv[0] is not None else 0.0

    rng = np.random.default_rng(seed)
    counts = simulate_sort_counts(N, int(n_items), int(n_factors), expected_hit_rate, int(n_sim), rng)
    point = nominal_alpha_counts(counts)
    notes = []
    if int(n_items) < 2:
        # resampling a single item always redraws it: a zero-width "interval" would claim false precision
        widths = np.full(int(n_sim), np.nan)
        notes.append("an interval for alpha needs at least 2 items to resample; none is given")
    else:
        widths = _ci_widths(counts, int(n_boot), rng)
    with np.errstate(all="ignore"):
        exp_alpha = float(np.nanmean(point)) if np.isfinite(point).any() else float("nan")
        width = float(np.nanmean(widths)) if np.isfinite(widths).any() else float("nan")
    if not np.isfinite(point).all():
        notes.append(f"{int((~np.isfinite(point)).sum())} simulated panels had no variation (alpha undefined)")

    msgs = []
    if N <= 5:
        msgs.append(f"With {N} judges every judge must rate an item relevant for it to meet the I-CVI "
                    "standard of 1.00.")
    else:
        msgs.append(f"With {N} judges an item needs at least {min_agree} judges rating it relevant (3 or 4) "
                    "to meet the I-CVI standard of .78.")
    if csv[0] is None:
        msgs.append(f"With {N} judges no item can reach a significant csv at .05 (p0 = .5), even if every "
                    "judge places it as intended.")
    else:
        msgs.append(f"An item needs at least {csv[0]} of {N} judges placing it on its intended factor for a "
                    "significant csv at .05 (p0 = .5).")
        msgs.append(f"If judges place items as intended {expected_hit_rate:.0%} of the time, about "
                    f"{share:.0%} of items will reach that count.")
    if csv[1] is not None:
        msgs.append(f"Against chance among {k} choices (p0 = 1/{k}) {csv[1]} of {N} placements suffice.")
    if cvr[0] is None:
        msgs.append(f"With {N} judges no CVR can be significant at .05; Lawshe's ratio needs at least 5 "
                    "judges.")
    else:
        msgs.append(f"Lawshe's CVR needs {cvr[0]} of {N} judges rating an item essential (CVR >= "
                    f"{cvr[1]:.3f}) to be significant at .05.")
    if np.isfinite(width):
        msgs.append(f"If judges place {expected_hit_rate:.0%} of the items on their intended factor, nominal "
                    f"alpha is about {exp_alpha:.2f}, and its 95% interval over {int(n_items)} items will be "
                    f"about {width:.2f} wide (simulated).")
    return PanelPlan(N, int(n_items), int(n_factors), float(expected_hit_rate), cvr, csv, std, min_agree,
                     share, exp_alpha, width, int(n_sim), int(n_boot), tuple(msgs), "; ".join(notes))
