"""Score a round: compose every statistic over its stored answers into one frozen :class:`RoundResults`.

Every number a page, report or export shows comes from this one object (computed once per answers
state): the statistics themselves live in :mod:`labelstudy.agreement`; here they are only called on the
judges x items tables built from ``Store.answers(round_id)`` and joined into tables.

Results are cached in-process (LRU of :data:`CACHE_SIZE`) by (database path, round id,
``Store.answers_state(round_id)``, invitations state, rules hash): a new answer, a submission, a revoked
link or an edited rules file gives a fresh score.
"""

from __future__ import annotations

import datetime as _dt
import threading
from collections import Counter, OrderedDict
from dataclasses import dataclass, field
from typing import Any

import numpy as np
import pandas as pd

from labelstudy.agreement._results import json_ready
from labelstudy.agreement.alpha import krippendorff_alpha
from labelstudy.agreement.cvi import scale_cvi
from labelstudy.agreement.itemsort import hit_ratios
from labelstudy.agreement.judges import judge_diagnostics
from labelstudy.errors import LabelstudyError
from labelstudy.results import _stats
from labelstudy.results._data import judge_labels, numeric, shown_positions, tidy_answers, wide
from labelstudy.results.rules import Rules, load_rules
from labelstudy.results.verdicts import item_verdict, label_verdict
from labelstudy.solution import diagnose
from labelstudy.tasks import NONE_CODE, TASK_LABELS, intended_key, normalise_config

__all__ = ["RoundResults", "score_round", "clear_cache", "CACHE_SIZE", "CAUTIONS"]

CACHE_SIZE = 16
NAN = float("nan")
CAUTIONS = (
    "Agreement indices are one strand of content-validity evidence, not proof of validity.",
    "For clinical or high-stakes use, further validation and local professional standards apply.",
    "Local ethics rules come first.",
)
RATING_DOMAINS = {"relevance": (1, 2, 3, 4), "essentiality": (1, 2, 3), "definition_fit": (1, 2, 3, 4, 5),
                  "naming": (1, 2, 3, 4, 5)}
TABLE_ORDER = ("agreement", "items", "labels", "judges", "sensitivity", "scale", "confusion",
               "co_occurrence", "clusters", "partition", "pile_names", "definition_fit", "naming",
               "comments", "rules", "answers")


@dataclass(frozen=True, eq=False)
class RoundResults:
    """Everything scored for one round. Tables are flat DataFrames (no meaningful index).

    ``meta``: study, round, panel counts, tasks; ``tables``: name -> DataFrame in :data:`TABLE_ORDER`
    (agreement per task x coefficient, items, labels, judges, sensitivity without flagged judges, scale
    CVI, confusion intended x assigned, open-sort co-occurrence, clusters matched to factors, per-judge
    partition agreement, pile names, definition fit, naming, comments, the rules used, the tidy answers);
    ``linkage``: the open-sort consensus dendrogram (scipy linkage) or None; ``cautions`` and ``notes``
    in words.
    """

    key: tuple
    meta: dict
    tables: dict
    rules: Rules
    cautions: tuple[str, ...]
    notes: tuple[str, ...]
    linkage: Any = None
    co_order: tuple = field(default=())

    def table(self, name: str) -> pd.DataFrame:
        return self.tables[name]

    def agreement_value(self, task_kind: str, coefficient_prefix: str) -> float:
        """The first agreement value of a task kind whose coefficient name starts with the prefix."""
        t = self.tables["agreement"]
        sel = t[(t["task_kind"] == task_kind) & t["coefficient"].str.startswith(coefficient_prefix)]
        return float(sel["value"].iloc[0]) if len(sel) else NAN

    def to_dict(self) -> dict:
        """JSON-ready: meta, rules, cautions, notes and every table as a list of records (NaN -> null)."""
        return {"meta": json_ready(self.meta), "rules": self.rules.to_dict(), "cautions": list(self.cautions),
                "notes": list(self.notes),
                "tables": {name: [json_ready(r) for r in df.to_dict("records")]
                           for name, df in self.tables.items()}}


_CACHE: "OrderedDict[tuple, RoundResults]" = OrderedDict()
_LOCK = threading.Lock()


def clear_cache() -> None:
    with _LOCK:
        _CACHE.clear()


def score_round(store, round_id: int, *, rules: Rules | None = None) -> RoundResults:
    """Score round ``round_id`` of ``store`` (cached; see the module docstring).

    ``rules`` defaults to ``PROJECT_DIR/rules.json`` beside the database (written from the shipped
    defaults on first use).
    """
    if rules is None:
        rules = load_rules(store.path.parent)
    invitations = store.invitations(round_id)
    inv_state = tuple((i["judge_id"], i["status"], i["submitted_at"] or "") for i in invitations)
    rnd = store.get_round(round_id)
    live = ()                               # a draft round shows the live solution: its edits count too
    if rnd["snapshot"] is None:
        live = (tuple((i["item_id"], i["version"]) for i in store.items(rnd["study_id"])),
                tuple((f["factor_id"], f["version"]) for f in store.factors(rnd["study_id"])))
    key = (str(store.path.resolve()), int(round_id), store.answers_state(round_id), inv_state, rules.hash, live)
    with _LOCK:
        hit = _CACHE.get(key)
        if hit is not None:
            _CACHE.move_to_end(key)
            return hit
    result = _score(store, round_id, rules, invitations, key)
    with _LOCK:
        _CACHE[key] = result
        while len(_CACHE) > CACHE_SIZE:
            _CACHE.popitem(last=False)
    return result


def _flat(df: pd.DataFrame, name: str | None = None) -> pd.DataFrame:
    out = df.reset_index()
    if name and "index" in out.columns:
        out = out.rename(columns={"index": name})
    return out


def _score(store, round_id: int, rules: Rules, invitations: list[dict], key: tuple) -> RoundResults:
    rnd = store.get_round(round_id)
    study = store.get_study(rnd["study_id"])
    solution = store.round_solution(round_id)
    tasks = store.tasks(round_id)
    seed = int(rnd["seed"])
    ikey = intended_key(solution)
    item_ids = [it.id for it in solution.items]
    fids = [f.id for f in solution.factors]
    fnames = {f.id: f.name for f in solution.factors}
    notes: list[str] = []
    cautions: list[str] = []

    labels = judge_labels(invitations)
    active = {i["judge_id"] for i in invitations if i["status"] == "active"}
    revoked = [labels[i["judge_id"]] for i in invitations if i["status"] != "active"]
    answers = store.answers(round_id)
    if revoked:
        notes.append(f"answers of {len(revoked)} judge(s) whose link was withdrawn are left out: "
                     + ", ".join(revoked))
    answers = answers[answers["judge_id"].isin(active)].copy()
    answers["judge_label"] = answers["judge_id"].map(labels)
    judges_with = [labels[j] for j in sorted(active) if j in set(answers["judge_id"])]
    submitted = [i for i in invitations if i["submitted_at"] and i["status"] == "active"]
    unsubmitted = [labels[i["judge_id"]] for i in invitations
                   if i["status"] == "active" and not i["submitted_at"] and labels[i["judge_id"]] in judges_with]
    if unsubmitted:
        notes.append(f"{len(unsubmitted)} judge(s) answered without submitting; their saved answers are "
                     "scored: " + ", ".join(unsubmitted))
    expertise = Counter((i["expertise"] or "not stated") for i in invitations
                        if i["status"] == "active" and labels[i["judge_id"]] in judges_with)

    agreement: list[dict] = []
    items = pd.DataFrame({"item": item_ids, "text": [it.text for it in solution.items],
                          "intended": [ikey[i] for i in item_ids],
                          "intended_name": [fnames[ikey[i]] for i in item_ids],
                          "loading": [it.loading(ikey[it.id]) for it in solution.items]}).set_index("item")
    diag = diagnose(solution)
    flags = {r.item: ", ".join(r.flags) for r in diag.items.itertuples(index=False)}
    items["flags"] = [flags.get(i, "") for i in item_ids]
    labels_t = pd.DataFrame({"factor": fids, "name": [fnames[f] for f in fids],
                             "definition": [f.definition for f in solution.factors]}).set_index("factor")
    ff = {r.factor: ", ".join(r.flags) for r in diag.factors.itertuples(index=False)}
    labels_t["solution_flags"] = [ff.get(f, "") for f in fids]
    tables: dict[str, pd.DataFrame] = {}
    linkage, co_order = None, ()
    first: dict[str, dict] = {}
    task_meta = []
    judge_inputs: dict[str, pd.DataFrame] = {}

    for task in tasks:
        kind, pos = task["kind"], task["position"]
        name = f"Task {pos + 1} ({kind.replace('_', ' ')})"
        sub = answers[answers["task_id"] == task["id"]]
        cfg = normalise_config(kind, task.get("config"))
        n_j = sub.loc[sub["value"].notna(), "judge_label"].nunique()
        task_meta.append({"task": pos + 1, "kind": kind, "label": TASK_LABELS[kind], "name": name,
                          "n_judges": int(n_j), "n_answers": int(sub["value"].notna().sum())})
        if kind in first:
            notes.append(f"{name}: only the first {kind.replace('_', ' ')} task feeds the items and labels "
                         "tables; its agreement is listed")
        if n_j == 0:
            notes.append(f"{name}: no answers yet")
            continue
        js = sorted(sub["judge_label"].unique())
        if kind == "label_match":
            domain = fids + ([NONE_CODE] if cfg.get("none_option", True) else [])
            table = wide(sub, item_ids, js)
            rows = _stats.agreement_rows(name, kind, numeric(table, domain), range(len(domain)),
                                         level="nominal", rules=rules, seed=seed)
            if kind not in first:
                first[kind] = {"table": table, "domain": domain,
                               **_stats.label_match_stats(table, ikey, domain,
                                                          NONE_CODE if NONE_CODE in domain else None, rules)}
                secs = sub[sub["item"].isin(item_ids)].pivot_table(index="judge_label", columns="item",
                                                                   values="seconds", aggfunc="first")
                judge_inputs["seconds"] = secs if secs.notna().any().any() else None
        elif kind == "open_sort":
            table = wide(sub, item_ids, js)
            piles = sub[sub["item"].str.startswith("pile:") & sub["value"].notna()]
            names = {(r.judge_label, r.item.split(":", 1)[1]): r.value for r in piles.itertuples(index=False)}
            rows = []
            if kind not in first:
                try:
                    first[kind] = _stats.open_sort_stats(table, names, pd.Series(ikey).reindex(item_ids))
                except LabelstudyError as exc:
                    notes.append(f"{name}: the open sort could not be analysed ({exc})")
                else:
                    part = first[kind]["partition"]
                    judges_only = part.drop(index="consensus")
                    rows.append(_stats._row(name, kind, "Adjusted Rand index, consensus vs key",
                                            float(part.loc["consensus", "ari"]),
                                            method="average-linkage consensus cut at the number of factors",
                                            n_judges=len(judges_only), n_items=len(item_ids)))
                    rows.append(_stats._row(name, kind, "Adjusted Rand index, mean judge vs key",
                                            float(judges_only["ari"].mean()), n_judges=len(judges_only),
                                            n_items=len(item_ids)))
                    rows.append(_stats._row(name, kind, "Krippendorff's alpha", NAN,
                                            note="not computed: pile numbers are each judge's own, so "
                                                 "judges' codes cannot be compared directly; see the ARI",
                                            n_judges=len(judges_only), n_items=len(item_ids)))
        elif kind in ("relevance", "essentiality"):
            table = wide(sub, item_ids, js)
            num = table.apply(pd.to_numeric, errors="coerce")
            rows = _stats.agreement_rows(name, kind, num, RATING_DOMAINS[kind], level="ordinal", rules=rules,
                                         seed=seed, weights="quadratic")
            if kind not in first:
                first[kind] = {"num": num, **({"cvr": _stats.essentiality_stats(num, rules)}
                                              if kind == "essentiality" else _stats.relevance_stats(num, rules))}
                if kind == "relevance":
                    judge_inputs["ratings"] = num
        elif kind == "definition_fit":
            units = [f"{i}|{f}" for i in item_ids for f in fids]
            table = wide(sub, units, js)
            num = table.apply(pd.to_numeric, errors="coerce")
            rows = _stats.agreement_rows(name, kind, num, RATING_DOMAINS[kind], level="ordinal", rules=rules,
                                         seed=seed, weights="quadratic")
            if kind not in first:
                long = sub[sub["item"].isin(units) & sub["value"].notna()]
                long = pd.DataFrame({"judge": long["judge_label"], "item": long["item"].str.split("|").str[0],
                                     "definition": long["item"].str.split("|").str[1],
                                     "value": pd.to_numeric(long["value"], errors="coerce")})
                try:
                    first[kind] = {"fit": _stats.deffit_stats(long, {i: ikey[i] for i in
                                                                     long["item"].unique()}, rules)}
                except LabelstudyError as exc:
                    notes.append(f"{name}: definition fit could not be tested ({exc})")
        else:  # naming
            units = [f"{f}|clarity" for f in fids]
            num = wide(sub, units, js).apply(pd.to_numeric, errors="coerce")
            rows = []
            if (num.notna().sum(axis=0) >= 2).sum() >= 2:
                rows = _stats.agreement_rows(name + ", clarity", kind, num, RATING_DOMAINS[kind],
                                             level="ordinal", rules=rules, seed=seed, weights="quadratic")
            if kind not in first:
                first[kind] = {"naming": _stats.naming_stats(sub, fids)}
        agreement.extend(rows)
        c = _stats.prevalence_caution(rows, rules["prevalence_gap"]) if rows else ""
        if c:
            cautions.append(c)

    # ---------------------------------------------------------------- items table
    lm = first.get("label_match")
    if lm:
        s = lm["item_sort"]
        items["hit_ratio"] = lm["hits"].per_item.reindex(item_ids)
        items["n_placements"] = s["n"].reindex(item_ids)
        items["psa"] = s["psa"].reindex(item_ids)
        items["csv"] = s["csv"].reindex(item_ids)
        items["csv_p"] = s["p_value"].reindex(item_ids)
        items["csv_significant"] = s["significant"].reindex(item_ids)
        items["rival"] = s["rival"].reindex(item_ids)
        items["rival_name"] = [fnames.get(r, r) if isinstance(r, str) else None for r in items["rival"]]
    rel = first.get("relevance")
    if rel:
        mk = rel["modified_kappa"]
        items["i_cvi"] = mk["i_cvi"].reindex(item_ids)
        items["icvi_standard"] = mk["standard"].reindex(item_ids)
        items["kappa_star"] = mk["kappa_star"].reindex(item_ids)
        items["kappa_star_band"] = mk["band"].reindex(item_ids)
    ess = first.get("essentiality")
    if ess:
        cvr = ess["cvr"]
        items["cvr"] = cvr["cvr"].reindex(item_ids)
        items["cvr_critical"] = cvr["critical"].reindex(item_ids)
        items["cvr_meets"] = cvr["meets"].reindex(item_ids)
    fit = first.get("definition_fit")
    if fit:
        items["deffit_verdict"] = fit["fit"].table["verdict"].reindex(item_ids)
    comments = answers[answers["comment"].fillna("").str.strip() != ""]
    comment_rows = [{"task": int(r.task_position) + 1, "task_kind": r.task_kind, "judge": r.judge_label,
                     "item": r.item.split("|")[0], "key": r.item, "comment": r.comment}
                    for r in comments.itertuples(index=False)]
    ctab = pd.DataFrame(comment_rows, columns=["task", "task_kind", "judge", "item", "key", "comment"])
    items["comments"] = [" | ".join(f"{r.judge}: {r.comment}" for r in ctab[ctab["item"] == i].itertuples())
                         for i in item_ids]
    verdicts = [item_verdict(dict(row, csv_significant=_bool(row.get("csv_significant")),
                                  cvr_meets=_bool(row.get("cvr_meets"))), rules)
                for row in items.to_dict("records")]
    items["verdict"] = [v for v, _ in verdicts]
    items["verdict_rule"] = [r for _, r in verdicts]

    # ---------------------------------------------------------------- labels table
    if lm:
        amb = lm["ambiguity"]
        for col in ("hit_rate", "attraction", "most_confused", "confusion_rate", "entropy"):
            labels_t[col] = amb[col].reindex(fids)
        labels_t["most_confused_name"] = [fnames.get(x) if isinstance(x, str) else None
                                          for x in labels_t["most_confused"]]
        tables["confusion"] = _flat(lm["confusion"], "intended")
    osr = first.get("open_sort")
    if osr:
        match = osr["match"]
        by_factor = {r.factor: (cl, r) for cl, r in match.iterrows() if r.factor is not None and r.overlap > 0}
        labels_t["cluster"] = [by_factor[f][0] if f in by_factor else None for f in fids]
        labels_t["cluster_overlap"] = [by_factor[f][1].overlap if f in by_factor else NAN for f in fids]
        labels_t["cluster_share"] = [by_factor[f][1].share if f in by_factor else NAN for f in fids]
        labels_t["cluster_factor_share"] = [by_factor[f][1].factor_share if f in by_factor else NAN
                                            for f in fids]
        words = osr["words"]
        labels_t["pile_names"] = ["; ".join(f"{w.token} ({w.count})" for w in
                                            words[words["cluster"] == by_factor[f][0]].head(6).itertuples())
                                  if f in by_factor and len(words) else "" for f in fids]
        cons = osr["consensus"]
        linkage = cons.linkage
        co = osr["co"]
        co_order = tuple(co.index)
        tables["co_occurrence"] = _flat(co, "item")
        tables["clusters"] = _flat(match.assign(items=[", ".join(cons.labels.index[cons.labels == cl])
                                                        for cl in match.index]), "cluster")
        tables["partition"] = _flat(osr["partition"], "judge")
        tables["pile_names"] = words
        if cons.note:
            notes.append("open sort: " + cons.note)
    nm = first.get("naming")
    if nm:
        t = nm["naming"].set_index("factor")
        for col in ("preferred_name", "preferred_votes", "mean_clarity", "proposed_names"):
            labels_t[col] = t[col].reindex(fids)
        tables["naming"] = nm["naming"]
    lv = [label_verdict(row, rules, fnames) for row in labels_t.to_dict("records")]
    labels_t["verdict"] = [v for v, _ in lv]
    labels_t["verdict_rule"] = [r for _, r in lv]

    # ---------------------------------------------------------------- judges and sensitivity
    judges_t, sens = _judges(lm, rel, judge_inputs, ikey, rules, seed, invitations, labels, judges_with)
    scale_rows = []
    if rel:
        sc = rel["scale"]
        scale_rows += [{"index": "S-CVI/Ave", "value": sc.ave, "standard": rules["scvi_ave_min"],
                        "meets": bool(sc.ave >= rules["scvi_ave_min"]) if np.isfinite(sc.ave) else None,
                        "n_items": sc.n_items, "source": "Polit & Beck (2006)"},
                       {"index": "S-CVI/UA", "value": sc.ua, "standard": NAN, "meets": None,
                        "n_items": sc.n_items, "source": "Polit & Beck (2006); falls as judges are added"}]
    if lm:
        scale_rows.append({"index": "Overall hit ratio", "value": lm["hits"].overall,
                           "standard": rules["item_hit_min"],
                           "meets": bool(lm["hits"].overall >= rules["item_hit_min"]), "n_items": len(item_ids),
                           "source": "Moore & Benbasat (1991)"})
    if fit:
        fn = fit["fit"]
        tables["definition_fit"] = _flat(fn.table, "item")
    tables.update({
        "agreement": pd.DataFrame(agreement, columns=list(_stats._row("", "", "", NAN).keys())),
        "items": _flat(items, "item"),
        "labels": _flat(labels_t, "factor"),
        "judges": judges_t,
        "sensitivity": sens,
        "scale": pd.DataFrame(scale_rows, columns=["index", "value", "standard", "meets", "n_items", "source"]),
        "comments": ctab,
        "rules": rules.table(),
        "answers": tidy_answers(answers, int(rnd["number"]), shown_positions(
            tasks, solution, seed, sorted({int(j) for j in answers["judge_id"]}))),
    })
    ordered = {k: tables[k] for k in TABLE_ORDER if k in tables}
    meta = {"study_id": int(study["id"]), "study_title": study["title"], "round_id": int(round_id),
            "round_number": int(rnd["number"]), "round_title": rnd["title"], "round_status": rnd["status"],
            "seed": seed, "n_invited": len(invitations),
            "n_active": len(active), "n_submitted": len(submitted), "n_judges_answered": len(judges_with),
            "expertise": dict(expertise), "n_items": len(item_ids), "n_factors": len(fids),
            "factors": [{"id": f, "name": fnames[f]} for f in fids], "tasks": task_meta,
            "scored_at": _dt.datetime.now(_dt.timezone.utc).isoformat(timespec="seconds"),
            "answers_state": list(key[2])}
    if not judges_with:
        notes.append("no judge has answered yet: there is nothing to score")
    return RoundResults(key=key, meta=meta, tables=ordered, rules=rules, cautions=tuple(cautions),
                        notes=tuple(notes), linkage=linkage, co_order=co_order)


def _bool(v: Any) -> bool | None:
    if v is None or (isinstance(v, float) and np.isnan(v)) or v is pd.NA:
        return None
    return bool(v)


def _judges(lm, rel, inputs, ikey, rules, seed, invitations, labels, judges_with):
    """Judge diagnostics and what the main statistics become without the flagged judges."""
    cols = ["judge", "expertise", "status", "n_answers", "agreement_with_key", "kappa_loo", "none_share",
            "n_ratings", "straightlining", "rating_sd", "median_seconds", "outlier", "rule"]
    sens_cols = ["statistic", "all_judges", "without_flagged", "n_all", "n_without", "flagged"]
    info = {labels[i["judge_id"]]: i for i in invitations}
    args: dict[str, Any] = {"z": rules["judge_outlier_z"]}
    if lm:
        args.update(assignments=lm["table"], key=ikey, domain=lm["domain"],
                    none_code=NONE_CODE if NONE_CODE in lm["domain"] else None)
    if inputs.get("ratings") is not None:
        args["ratings"] = inputs["ratings"]
    if inputs.get("seconds") is not None and lm:
        args["seconds"] = inputs["seconds"].reindex(index=lm["table"].index)
    if len(args) == 1:
        return pd.DataFrame(columns=cols), pd.DataFrame(columns=sens_cols)
    d = judge_diagnostics(**args)
    d = d.reset_index()
    d.insert(1, "expertise", [info[j]["expertise"] if j in info else "" for j in d["judge"]])
    d.insert(2, "status", ["submitted" if j in info and info[j]["submitted_at"] else "not submitted"
                           for j in d["judge"]])
    d = d[cols]
    flagged = [j for j, o in zip(d["judge"], d["outlier"]) if o]
    rows = []
    if flagged:
        who = ", ".join(flagged)
        if lm:
            t = lm["table"]
            keep = t.drop(index=[j for j in flagged if j in t.index])
            codes = {c: i for i, c in enumerate(lm["domain"])}
            num_all = numeric(t, lm["domain"])
            num_keep = numeric(keep, lm["domain"])
            dom = list(range(len(codes)))
            a_all = krippendorff_alpha(num_all, "nominal", domain=dom).alpha
            a_keep = krippendorff_alpha(num_keep, "nominal", domain=dom).alpha
            rows.append({"statistic": "Krippendorff's alpha (nominal), label matching", "all_judges": a_all,
                         "without_flagged": a_keep, "n_all": len(t), "n_without": len(keep), "flagged": who})
            rows.append({"statistic": "Overall hit ratio, label matching",
                         "all_judges": hit_ratios(t, ikey, domain=lm["domain"]).overall,
                         "without_flagged": hit_ratios(keep, ikey, domain=lm["domain"]).overall,
                         "n_all": len(t), "n_without": len(keep), "flagged": who})
        if rel:
            num = rel["num"]
            keep = num.drop(index=[j for j in flagged if j in num.index])
            rows.append({"statistic": "S-CVI/Ave (mean I-CVI), relevance", "all_judges": scale_cvi(num).ave,
                         "without_flagged": scale_cvi(keep).ave, "n_all": len(num), "n_without": len(keep),
                         "flagged": who})
            dom = [1, 2, 3, 4]
            rows.append({"statistic": "Krippendorff's alpha (ordinal), relevance",
                         "all_judges": krippendorff_alpha(num, "ordinal", domain=dom).alpha,
                         "without_flagged": krippendorff_alpha(keep, "ordinal", domain=dom).alpha,
                         "n_all": len(num), "n_without": len(keep), "flagged": who})
    return d, pd.DataFrame(rows, columns=sens_cols)
