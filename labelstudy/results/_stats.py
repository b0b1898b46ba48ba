"""Per-task compositions of :mod:`labelstudy.agreement` (no statistic is computed here, only called).

Each function takes the judges x items tables of one task (see :mod:`labelstudy.results._data`) and
returns plain DataFrames / dicts for :func:`labelstudy.results.score.score_round`.
"""

from __future__ import annotations

from collections import Counter
from typing import Any, Sequence

import numpy as np
import pandas as pd

from labelstudy.agreement._data import AgreementInputError
from labelstudy.agreement.alpha import krippendorff_alpha
from labelstudy.agreement.bands import band
from labelstudy.agreement.cvi import lawshe_cvr, modified_kappa, scale_cvi
from labelstudy.agreement.deffit import definition_fit
from labelstudy.agreement.gwet import gwet_ac1, percent_agreement
from labelstudy.agreement.itemsort import confusion, hit_ratios, item_sort, label_ambiguity
from labelstudy.agreement.kappa import fleiss_kappa, light_kappa
from labelstudy.agreement.opensort import (consensus_partition, co_occurrence, match_clusters,
                                           partition_agreement, pile_names)

__all__ = ["agreement_rows", "prevalence_caution", "label_match_stats", "open_sort_stats",
           "relevance_stats", "icvi_threshold", "essentiality_stats", "deffit_stats", "naming_stats"]

NAN = float("nan")
PREVALENCE_WORDS = ("high agreement with skewed categories: kappa-type coefficients are depressed (the kappa "
                    "paradox, Feinstein & Cicchetti 1990); read AC1 and percent agreement beside them")


def _row(task: str, kind: str, coefficient: str, value: float, *, ci_low=NAN, ci_high=NAN, scale="",
         method="", note="", n_judges=0, n_items=0) -> dict:
    return {"task": task, "task_kind": kind, "coefficient": coefficient, "value": value,
            "ci_low": ci_low, "ci_high": ci_high, "band": band(value, scale) if scale else "",
            "band_scale": scale, "method": method, "n_judges": n_judges, "n_items": n_items, "note": note}


def agreement_rows(task: str, kind: str, num: pd.DataFrame, domain: Sequence[float], *, level: str, rules,
                   seed: int, weights: str | None = None) -> list[dict]:
    """Alpha (bootstrap interval), Fleiss' kappa, Light's kappa, AC1 and percent agreement of one task.

    ``num`` is judges x units of numeric codes from ``domain`` (NaN = no answer); ``level`` is alpha's
    metric (nominal for sorts, ordinal for ratings).
    """
    domain = list(domain)
    answered = num.notna()
    n_j, n_i = int(answered.any(axis=1).sum()), int((answered.sum(axis=0) >= 1).sum())
    common = dict(n_judges=n_j, n_items=n_i)
    ci = rules["ci_level"]
    rows = []
    a = krippendorff_alpha(num, level, domain=domain, n_boot=rules["alpha_n_boot"], method="units", ci=ci,
                           seed=seed)
    rows.append(_row(task, kind, f"Krippendorff's alpha ({level})", a.alpha, ci_low=a.ci_low,
                     ci_high=a.ci_high, scale="krippendorff",
                     method=f"{int(ci * 100)}% percentile interval, unit bootstrap, {a.n_boot} replicates, "
                            f"seed {seed}", note=a.note, **common))
    try:
        f = fleiss_kappa(num, domain=domain)
        rows.append(_row(task, kind, "Fleiss' kappa", f.kappa, scale="landis_koch", note=f.note, **common))
    except AgreementInputError as exc:
        rows.append(_row(task, kind, "Fleiss' kappa", NAN, note=f"not computed: {exc}", **common))
    lk = light_kappa(num, domain=domain, weights=weights)
    wname = f", {weights} weights" if weights else ""
    rows.append(_row(task, kind, f"Light's kappa (mean pairwise Cohen's kappa{wname})", lk.kappa,
                     scale="landis_koch", note=lk.note, **common))
    g = gwet_ac1(num, domain=domain, ci=ci)
    rows.append(_row(task, kind, "Gwet's AC1", g.coefficient, ci_low=g.ci_low, ci_high=g.ci_high,
                     scale="landis_koch", method=f"{int(ci * 100)}% t interval (Gwet 2008 variance)",
                     note=g.note, **common))
    p = percent_agreement(num)
    rows.append(_row(task, kind, "Percent agreement", p.value, note=p.note, **common))
    return rows


def prevalence_caution(rows: list[dict], gap: float) -> str:
    """The kappa-paradox caution when AC1 exceeds alpha or a kappa by more than ``gap``."""
    vals = {r["coefficient"]: r["value"] for r in rows}
    ac1 = vals.get("Gwet's AC1", NAN)
    others = [v for name, v in vals.items() if name.startswith(("Krippendorff", "Fleiss", "Light"))]
    if np.isfinite(ac1) and any(np.isfinite(v) and ac1 - v > gap for v in others):
        task = rows[0]["task"]
        low = min(v for v in others if np.isfinite(v))
        return f"{task}: AC1 {ac1:.3f} exceeds alpha/kappa (lowest {low:.3f}) by more than {gap:.2f}: " \
               + PREVALENCE_WORDS
    return ""


def label_match_stats(table: pd.DataFrame, key: dict, domain: Sequence[str], none_code: str | None,
                      rules) -> dict[str, Any]:
    """Item-sort indices, hit ratios, confusion and label ambiguity of a label-matching task."""
    sort = item_sort(table, key, domain=domain, p0=rules["csv_p0"], alpha=rules["csv_alpha"],
                     none_code=none_code)
    hits = hit_ratios(table, key, domain=domain)
    conf = confusion(table, key, domain=domain)
    amb = label_ambiguity(table, key, domain=domain)
    return {"item_sort": sort, "hits": hits, "confusion": conf, "ambiguity": amb}


def open_sort_stats(table: pd.DataFrame, names: dict, key: pd.Series) -> dict[str, Any]:
    """Co-occurrence, consensus partition (as many clusters as factors), its match to the factors, ARI per
    judge and of the consensus, and the words judges used for their piles."""
    keep = table.notna().any(axis=1)
    table = table[keep]
    co = co_occurrence(table)
    cons = consensus_partition(table, key=key)
    part = partition_agreement(table, key)
    match = match_clusters(cons.labels, key)
    names = {k: v for k, v in names.items() if k[0] in set(table.index)}
    words = pile_names(table, names, cons.labels)
    return {"co": co, "consensus": cons, "partition": part, "match": match, "words": words}


def icvi_threshold(n: int, rules) -> float:
    """The I-CVI standard for ``n`` judges under ``rules`` (defaults as :func:`~labelstudy.agreement.cvi.
    icvi_standard`: 1.00 with five or fewer judges, .78 with six or more; Lynn 1986, Polit & Beck 2006)."""
    if n < 1:
        return NAN
    return rules["icvi_min_small_panel"] if n <= rules["icvi_small_panel_max"] else rules["icvi_min_large_panel"]


def relevance_stats(num_ratings: pd.DataFrame, rules) -> dict[str, Any]:
    """I-CVI with modified kappa, the I-CVI standard per item, and S-CVI (ratings as 1..4 codes)."""
    mk = modified_kappa(num_ratings)
    mk["standard"] = [icvi_threshold(int(n), rules) for n in mk["n"]]
    return {"modified_kappa": mk, "scale": scale_cvi(num_ratings)}


def essentiality_stats(num_ratings: pd.DataFrame, rules) -> pd.DataFrame:
    """Lawshe's CVR per item against its exact critical value (ratings as 1..3 codes, 3 = essential)."""
    return lawshe_cvr(num_ratings, essential=3, alpha=rules["cvr_alpha"])


def deffit_stats(long: pd.DataFrame, key: dict, rules):
    """Hinkin & Tracey definition fit from long ratings (judge, item, definition, value)."""
    return definition_fit(long, key=pd.Series(key), alpha=rules["deffit_alpha"])


def naming_stats(answers: pd.DataFrame, factor_ids: Sequence[str]) -> pd.DataFrame:
    """Per factor: the most chosen candidate (ties: alphabetical), its votes, mean clarity, proposed names."""
    rows = []
    for fid in factor_ids:
        sub = answers[answers["item"].str.startswith(f"{fid}|")]
        get = lambda facet: sub.loc[(sub["item"] == f"{fid}|{facet}") & sub["value"].notna(), "value"]  # noqa
        choices = Counter(get("choice"))
        ranked = sorted(choices.items(), key=lambda kv: (-kv[1], kv[0]))
        clarity = pd.to_numeric(get("clarity"), errors="coerce").dropna()
        proposed = Counter(v.strip() for v in get("name") if v.strip())
        by_fold: dict[str, list] = {}
        for text, n in proposed.items():
            by_fold.setdefault(text.casefold(), [text, 0])[1] += n
        names = sorted(by_fold.values(), key=lambda kv: (-kv[1], kv[0].casefold()))
        rows.append({"factor": fid, "preferred_name": ranked[0][0] if ranked else None,
                     "preferred_votes": ranked[0][1] if ranked else 0, "n_choices": sum(choices.values()),
                     "choices": "; ".join(f"{c} ({n})" for c, n in ranked),
                     "mean_clarity": float(clarity.mean()) if len(clarity) else NAN,
                     "n_clarity": int(len(clarity)),
                     "proposed_names": "; ".join(f"{t} ({n})" for t, n in names)})
    return pd.DataFrame(rows)
