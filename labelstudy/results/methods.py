"""A methods-and-results paragraph in journal style (Markdown), with the references of every method used.

Written from one :class:`~labelstudy.results.score.RoundResults`; every number is read from its tables.
"""

from __future__ import annotations

import math

from labelstudy.agreement._results import fmt_ci

__all__ = ["methods_markdown", "REFERENCES", "references_used", "num"]

REFERENCES = {
    "anderson1991": "Anderson, J. C., & Gerbing, D. W. (1991). Predicting the performance of measures in a "
                    "confirmatory factor analysis with a pretest assessment of their substantive validities. "
                    "Journal of Applied Psychology, 76, 732-740.",
    "ayre2014": "Ayre, C., & Scally, A. J. (2014). Critical values for Lawshe's content validity ratio: "
                "Revisiting the original methods of calculation. Measurement and Evaluation in Counseling and "
                "Development, 47, 79-86.",
    "cicchetti1981": "Cicchetti, D. V., & Sparrow, S. A. (1981). Developing criteria for establishing interrater "
                     "reliability of specific items. American Journal of Mental Deficiency, 86, 127-137.",
    "cohen1960": "Cohen, J. (1960). A coefficient of agreement for nominal scales. Educational and "
                 "Psychological Measurement, 20, 37-46.",
    "feinstein1990": "Feinstein, A. R., & Cicchetti, D. V. (1990). High agreement but low kappa: I. The "
                     "problems of two paradoxes. Journal of Clinical Epidemiology, 43, 543-549.",
    "fleiss1971": "Fleiss, J. L. (1971). Measuring nominal scale agreement among many raters. Psychological "
                  "Bulletin, 76, 378-382.",
    "gwet2008": "Gwet, K. L. (2008). Computing inter-rater reliability and its variance in the presence of "
                "high agreement. British Journal of Mathematical and Statistical Psychology, 61, 29-48.",
    "hayes2007": "Hayes, A. F., & Krippendorff, K. (2007). Answering the call for a standard reliability "
                 "measure for coding data. Communication Methods and Measures, 1, 77-89.",
    "hinkin1999": "Hinkin, T. R., & Tracey, J. B. (1999). An analysis of variance approach to content "
                  "validation. Organizational Research Methods, 2, 175-186.",
    "holm1979": "Holm, S. (1979). A simple sequentially rejective multiple test procedure. Scandinavian "
                "Journal of Statistics, 6, 65-70.",
    "howard2016": "Howard, M. C., & Melloy, R. C. (2016). Evaluating item-sort task methods. Organizational "
                  "Research Methods, 19, 173-186.",
    "hubert1985": "Hubert, L., & Arabie, P. (1985). Comparing partitions. Journal of Classification, 2, "
                  "193-218.",
    "krippendorff2004": "Krippendorff, K. (2004). Content analysis: An introduction to its methodology (2nd "
                        "ed.). Sage.",
    "kuhn1955": "Kuhn, H. W. (1955). The Hungarian method for the assignment problem. Naval Research "
                "Logistics Quarterly, 2, 83-97.",
    "landis1977": "Landis, J. R., & Koch, G. G. (1977). The measurement of observer agreement for categorical "
                  "data. Biometrics, 33, 159-174.",
    "lawshe1975": "Lawshe, C. H. (1975). A quantitative approach to content validity. Personnel Psychology, 28, "
                  "563-575.",
    "light1971": "Light, R. J. (1971). Measures of response agreement for qualitative data: Some "
                 "generalizations and alternatives. Psychological Bulletin, 76, 365-377.",
    "lynn1986": "Lynn, M. R. (1986). Determination and quantification of content validity. Nursing Research, "
                "35, 382-385.",
    "moore1991": "Moore, G. C., & Benbasat, I. (1991). Development of an instrument to measure the perceptions "
                 "of adopting an information technology innovation. Information Systems Research, 2, 192-222.",
    "polit2006": "Polit, D. F., & Beck, C. T. (2006). The content validity index: Are you sure you know what's "
                 "being reported? Critique and recommendations. Research in Nursing & Health, 29, 489-497.",
    "polit2007": "Polit, D. F., Beck, C. T., & Owen, S. V. (2007). Is the CVI an acceptable indicator of "
                 "content validity? Appraisal and recommendations. Research in Nursing & Health, 30, 459-467.",
}
_BY_KIND = {
    "label_match": ["krippendorff2004", "hayes2007", "fleiss1971", "cohen1960", "light1971", "gwet2008",
                    "anderson1991", "howard2016", "moore1991", "landis1977", "feinstein1990"],
    "open_sort": ["hubert1985", "kuhn1955"],
    "relevance": ["krippendorff2004", "lynn1986", "polit2006", "polit2007", "cicchetti1981", "gwet2008",
                  "feinstein1990"],
    "essentiality": ["lawshe1975", "ayre2014", "krippendorff2004", "gwet2008"],
    "definition_fit": ["hinkin1999", "holm1979", "krippendorff2004"],
    "naming": [],
}
_TASK_WORDS = {
    "label_match": "a closed sort in which each of the {n_items} items was placed under one of the {n_factors} "
                   "factors (or \"none of these fits\")",
    "open_sort": "an open sort in which judges grouped the items into piles of their own and named them",
    "relevance": "ratings of each item's relevance to its intended factor on the 4-point scale of Lynn (1986)",
    "essentiality": "ratings of each item as essential, useful but not essential, or not necessary "
                    "(Lawshe, 1975)",
    "definition_fit": "ratings of every item against every factor definition from 1 (not at all) to 5 "
                      "(completely; Hinkin & Tracey, 1999)",
    "naming": "a naming task in which judges proposed a name for each factor, chose the best candidate and "
              "rated its clarity",
}


def num(x, digits: int = 2) -> str:
    """Journal style: no leading zero (.78), ``n/a`` when undefined."""
    try:
        v = float(x)
    except (TypeError, ValueError):
        return "n/a"
    if not math.isfinite(v):
        return "n/a"
    s = f"{v:.{digits}f}"
    return s.replace("0.", ".", 1) if s.startswith(("0.", "-0.")) else s


def references_used(results) -> list[str]:
    keys = []
    for t in results.meta["tasks"]:
        if t["n_answers"]:
            keys += _BY_KIND[t["kind"]]
    return sorted({REFERENCES[k] for k in keys})


def _list(words: list[str]) -> str:
    if len(words) <= 1:
        return "".join(words)
    return ", ".join(words[:-1]) + " and " + words[-1]


def methods_markdown(results, *, comparison=None) -> str:
    """The methods-and-results text with cautions and references (Markdown)."""
    m, t, rules = results.meta, results.tables, results.rules
    exp = "; ".join(f"{n} {e}" for e, n in sorted(m["expertise"].items())) or "expertise not recorded"
    tasks = [x for x in m["tasks"] if x["n_answers"]]
    task_words = _list([_TASK_WORDS[x["kind"]].format(n_items=m["n_items"], n_factors=m["n_factors"])
                        for x in tasks])
    out = [f"# Methods and results: {m['study_title']}, round {m['round_number']}", "", "## Methods", ""]
    p = (f"Of {m['n_invited']} expert judges invited, {m['n_judges_answered']} answered and {m['n_submitted']} "
         f"submitted ({exp}). They judged {m['n_items']} items of a {m['n_factors']}-factor solution in "
         f"{len(tasks)} task(s): {task_words or 'none yet'}. ")
    p += ("Agreement was estimated with Krippendorff's alpha (nominal for sorts, ordinal for ratings; "
          f"Krippendorff, 2004) with {int(rules['ci_level'] * 100)}% percentile intervals from "
          f"{rules['alpha_n_boot']} unit-bootstrap replicates (items resampled; seed {m['seed']}), Fleiss' "
          "kappa where every item had the same number of judges (Fleiss, 1971), Light's mean pairwise Cohen's "
          "kappa (Light, 1971; quadratic weights for ratings), Gwet's AC1 (Gwet, 2008) and percent agreement; "
          "coefficients are read with the bands of Landis and Koch (1977) and, for alpha, Krippendorff (2004). ")
    kinds = {x["kind"] for x in tasks}
    if "label_match" in kinds:
        p += (f"For each item the hit ratio (Moore & Benbasat, 1991), the proportion of substantive agreement "
              f"and the substantive-validity coefficient (csv) with a one-sided exact binomial test "
              f"(p0 = {num(rules['csv_p0'])}, alpha = {num(rules['csv_alpha'])}; Anderson & Gerbing, 1991) "
              "were computed. ")
    if "relevance" in kinds:
        p += ("Content validity was indexed by the I-CVI with the modified kappa of Polit, Beck and Owen (2007) "
              f"and the S-CVI/Ave (Polit & Beck, 2006), against I-CVI {num(rules['icvi_min_small_panel'])} with "
              f"{rules['icvi_small_panel_max']} or fewer judges and {num(rules['icvi_min_large_panel'])} "
              f"otherwise (Lynn, 1986). ")
    if "essentiality" in kinds:
        p += ("Lawshe's (1975) content validity ratio was compared with its exact one-tailed critical value "
              f"(alpha = {num(rules['cvr_alpha'])}; Ayre & Scally, 2014). ")
    if "definition_fit" in kinds:
        p += ("Definition fit was tested per item with paired one-sided contrasts of the intended definition "
              "against each other definition, Holm-corrected (Hinkin & Tracey, 1999; Holm, 1979). ")
    if "open_sort" in kinds:
        p += ("Open sorts were summarised by item co-occurrence, an average-linkage consensus partition with as "
              "many clusters as factors, clusters matched to factors by the Hungarian method (Kuhn, 1955), and "
              "the adjusted Rand index against the factor key (Hubert & Arabie, 1985). ")
    p += ("Items were kept, revised or dropped, and labels judged clear, ambiguous or overlapping, by the "
          "decision rules listed in the report.")
    out += [p, "", "## Results", ""]
    ag = t["agreement"]
    sentences = []
    for x in tasks:
        rows = ag[ag["task"].str.startswith(f"Task {x['task']} ")]
        parts = []
        for r in rows.itertuples():
            if r.value is None or not math.isfinite(float(r.value)):
                continue
            ci = fmt_ci(r.ci_low, r.ci_high, rules["ci_level"])
            parts.append(f"{r.coefficient} = {num(r.value)}" + (f", {ci}" if ci else "")
                         + (f" ({r.band})" if r.band else ""))
        if parts:
            sentences.append(f"In the {x['kind'].replace('_', ' ')} task, " + "; ".join(parts) + ".")
    res = " ".join(sentences)
    sc = t["scale"].set_index("index") if len(t["scale"]) else None
    if sc is not None and "S-CVI/Ave" in sc.index:
        res += f" The S-CVI/Ave was {num(sc.loc['S-CVI/Ave', 'value'])}."
    items = t["items"]
    for verdict in ("revise", "drop"):
        sel = items[items["verdict"] == verdict]
        if len(sel):
            res += (f" {len(sel)} of {len(items)} items were marked {verdict}: "
                    + "; ".join(f"{r.item} ({r.verdict_rule})" for r in sel.itertuples()) + ".")
    keep = int((items["verdict"] == "keep").sum())
    res += f" {keep} item(s) were kept."
    labs = t["labels"]
    unclear = labs[labs["verdict"] != "clear"]
    if len(unclear):
        res += " Labels needing revision: " + "; ".join(
            f"{r.factor} {r.name} ({r.verdict}: {r.verdict_rule})" for r in unclear.itertuples()) + "."
    else:
        res += " Every label was judged clear."
    sens = t["sensitivity"]
    if len(sens):
        res += (f" Without the judge(s) flagged as outliers ({sens['flagged'].iloc[0]}): "
                + "; ".join(f"{r.statistic} {num(r.all_judges)} -> {num(r.without_flagged)}"
                            for r in sens.itertuples()) + ".")
    out += [res.strip() or "No answers have been scored yet.", ""]
    if comparison is not None:
        ch = comparison.items[comparison.items["verdict_changed"]]
        out += [f"Compared with round {comparison.round_a}, {len(ch)} item verdict(s) changed"
                + (": " + "; ".join(f"{r.item} {r.verdict_a} -> {r.verdict_b}" for r in ch.itertuples())
                   if len(ch) else "") + ".", ""]
    if results.cautions:
        out += ["## Cautions from the data", ""] + [f"- {c}" for c in results.cautions] + [""]
    from labelstudy.results.score import CAUTIONS
    out += ["## Cautions", ""] + [f"- {c}" for c in CAUTIONS] + ["", "## References", ""]
    out += [f"- {r}" for r in references_used(results)]
    return "\n".join(out) + "\n"
