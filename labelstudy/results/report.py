"""The results as HTML: the context shared by the served results page and the standalone report file.

The standalone report (``templates/results/report.html``) is rendered with a plain jinja2 environment over
labelstudy's template folder, so it works without a Flask app (the CLI). It is self-contained: the
stylesheet ``labelstudy/static/report.css`` is inlined in a ``<style>`` block, plots are embedded as
``data:`` URIs, and nothing refers to any other address. The served page (``templates/results/round.html``)
includes the same body partial, links the same stylesheet and so obeys the app's CSP (no inline style).
"""

from __future__ import annotations

import math
from pathlib import Path

import jinja2
import pandas as pd

from labelstudy.agreement.bands import BANDS
from labelstudy.results.methods import num, references_used
from labelstudy.results.plots import round_plots
from labelstudy.results.rules import VERDICT_LOGIC
from labelstudy.results.score import CAUTIONS

__all__ = ["report_context", "render_report", "display_table", "fmt", "css_text"]

# (column, header, kind) per table shown; kind "num" (3 decimals), "int", "p" (p-value), "text", "bool"
COLUMNS = {
    "agreement": [("task", "Task", "text"), ("coefficient", "Coefficient", "text"), ("value", "Value", "num"),
                  ("ci_low", "CI low", "num"), ("ci_high", "CI high", "num"), ("band", "Band", "text"),
                  ("method", "Interval", "text"), ("n_judges", "Judges", "int"), ("n_items", "Units", "int"),
                  ("note", "Note", "text")],
    "items": [("item", "Item", "text"), ("intended", "Intended", "text"), ("loading", "Loading", "num"),
              ("hit_ratio", "Hit ratio", "num"), ("psa", "psa", "num"), ("csv", "csv", "num"),
              ("csv_p", "csv p", "p"), ("csv_significant", "csv sig.", "bool"), ("rival", "Rival", "text"),
              ("i_cvi", "I-CVI", "num"), ("icvi_standard", "I-CVI std", "num"),
              ("kappa_star", "k*", "num"), ("kappa_star_band", "k* band", "text"), ("cvr", "CVR", "num"),
              ("cvr_critical", "CVR crit.", "num"), ("cvr_meets", "CVR ok", "bool"),
              ("deffit_verdict", "Definition fit", "text"), ("verdict", "Verdict", "text")],
    "item_verdicts": [("item", "Item", "text"), ("text", "Text", "text"), ("intended_name", "Intended factor", "text"),
                      ("flags", "Solution flags", "text"), ("comments", "Judges' comments", "text"),
                      ("verdict", "Verdict", "text"), ("verdict_rule", "Rule that produced it", "text")],
    "labels": [("factor", "Factor", "text"), ("name", "Name", "text"), ("hit_rate", "Hit rate", "num"),
               ("attraction", "Attraction", "num"), ("most_confused", "Most confused with", "text"),
               ("confusion_rate", "Confusion", "num"), ("entropy", "Entropy", "num"),
               ("cluster", "Open-sort cluster", "text"), ("cluster_overlap", "Items shared", "int"),
               ("cluster_share", "Cluster purity", "num"), ("cluster_factor_share", "Factor coverage", "num"),
               ("preferred_votes", "Votes for preferred name", "int"), ("mean_clarity", "Clarity", "num"),
               ("verdict", "Verdict", "text")],
    "label_verdicts": [("factor", "Factor", "text"), ("name", "Name", "text"), ("pile_names", "Pile names (words)", "text"),
                       ("preferred_name", "Preferred name", "text"), ("proposed_names", "Proposed names", "text"),
                       ("solution_flags", "Solution flags", "text"), ("verdict", "Verdict", "text"),
                       ("verdict_rule", "Rule that produced it", "text")],
    "judges": [("judge", "Judge", "text"), ("expertise", "Expertise", "text"), ("status", "Status", "text"),
               ("agreement_with_key", "Agreement with key", "num"), ("kappa_loo", "Kappa with panel", "num"),
               ("none_share", "'None' share", "num"), ("straightlining", "Straightlining", "num"),
               ("median_seconds", "Median s/item", "num"), ("outlier", "Flagged", "bool"),
               ("rule", "Why", "text")],
    "sensitivity": [("statistic", "Statistic", "text"), ("all_judges", "All judges", "num"),
                    ("without_flagged", "Without flagged", "num"), ("n_all", "n", "int"),
                    ("n_without", "n without", "int"), ("flagged", "Flagged", "text")],
    "scale": [("index", "Index", "text"), ("value", "Value", "num"), ("standard", "Standard", "num"),
              ("meets", "Meets", "bool"), ("n_items", "Items", "int"), ("source", "Source", "text")],
    "clusters": [("cluster", "Cluster", "text"), ("factor", "Matched factor", "text"),
                 ("overlap", "Overlap", "int"), ("size", "Size", "int"), ("share", "Share", "num"),
                 ("factor_share", "Factor share", "num"), ("items", "Items", "text")],
    "partition": [("judge", "Judge", "text"), ("ari", "ARI", "num"), ("ami", "AMI", "num"),
                  ("n_piles", "Piles", "int"), ("n_items", "Items", "int")],
    "naming": [("factor", "Factor", "text"), ("preferred_name", "Preferred", "text"),
               ("choices", "Choices", "text"), ("mean_clarity", "Mean clarity", "num"),
               ("n_clarity", "n", "int"), ("proposed_names", "Proposed names", "text")],
    "comments": [("task", "Task", "int"), ("judge", "Judge", "text"), ("key", "Item", "text"),
                 ("comment", "Comment", "text")],
    "rules": [("rule", "Rule", "text"), ("value", "Value", "text"), ("meaning", "Meaning", "text"),
              ("source", "Source", "text")],
}
COMPARE_COLUMNS = {
    "items": [("item", "Item", "text"), ("hit_ratio_a", "Hit a", "num"), ("hit_ratio_b", "Hit b", "num"),
              ("hit_ratio_change", "Change", "num"), ("i_cvi_a", "I-CVI a", "num"), ("i_cvi_b", "I-CVI b", "num"),
              ("i_cvi_change", "Change", "num"), ("verdict_a", "Verdict a", "text"),
              ("verdict_b", "Verdict b", "text")],
    "labels": [("factor", "Factor", "text"), ("hit_rate_a", "Hit a", "num"), ("hit_rate_b", "Hit b", "num"),
               ("hit_rate_change", "Change", "num"), ("verdict_a", "Verdict a", "text"),
               ("verdict_b", "Verdict b", "text")],
    "agreement": [("task_kind", "Task", "text"), ("coefficient", "Coefficient", "text"),
                  ("value_a", "Round a", "num"), ("value_b", "Round b", "num"), ("change", "Change", "num")],
}


def fmt(value, kind: str = "num") -> str:
    """A cell as text: 3 decimals for numbers, p-values as ``< .001``, yes/no, blank when missing."""
    if value is None or value is pd.NA:
        return ""
    if kind == "bool":
        return "yes" if bool(value) else "no"
    if kind == "text":
        if isinstance(value, float) and math.isnan(value):
            return ""
        if isinstance(value, float) and value.is_integer():
            return str(int(value))
        return str(value)
    try:
        v = float(value)
    except (TypeError, ValueError):
        return str(value)
    if not math.isfinite(v):
        return ""
    if kind == "int":
        return str(int(round(v)))
    if kind == "p":
        return "< .001" if v < 0.001 else f"{v:.3f}"
    return f"{v:.3f}"


def display_table(df: pd.DataFrame, columns) -> dict:
    """Headers and formatted rows of the columns that exist in ``df`` (and are not all empty)."""
    cols = [(c, h, k) for c, h, k in columns if c in df.columns and df[c].notna().any()
            and not (df[c].astype(str) == "").all()]
    rows = [[{"text": fmt(v, k), "num": k in ("num", "int", "p"), "col": c}
             for (c, _, k), v in zip(cols, r)] for r in df[[c for c, _, _ in cols]].itertuples(index=False)]
    return {"headers": [(h, k in ("num", "int", "p")) for _, h, k in cols], "rows": rows, "n": len(df)}


def css_text() -> str:
    return (Path(__file__).resolve().parent.parent / "static" / "report.css").read_text(encoding="utf-8")


def report_context(results, *, comparison=None, plots=None) -> dict:
    """Everything the body partial shows, formatted."""
    t = results.tables
    plots = round_plots(results) if plots is None else plots
    source = {"item_verdicts": "items", "label_verdicts": "labels"}
    shown = {name: display_table(t[source.get(name, name)], cols) for name, cols in COLUMNS.items()
             if source.get(name, name) in t}
    plot_views = []
    for p in plots:
        table = display_table(p.table, [(c, str(c), "num" if pd.api.types.is_float_dtype(p.table[c]) else "text")
                                        for c in p.table.columns])
        plot_views.append({"name": p.name, "title": p.title, "src": p.data_uri, "alt": p.alt, "table": table})
    comp = None
    if comparison is not None:
        comp = {"round_a": comparison.round_a, "round_b": comparison.round_b,
                **{n: display_table(getattr(comparison, n), cols) for n, cols in COMPARE_COLUMNS.items()}}
    used_bands = sorted({b for b in t["agreement"]["band_scale"] if b} | {"cicchetti_sparrow"})
    return {"meta": results.meta, "tables": shown, "plots": plot_views, "comparison": comp,
            "cautions": CAUTIONS, "data_cautions": results.cautions, "notes": results.notes,
            "verdict_logic": VERDICT_LOGIC, "references": references_used(results),
            "bands": [(b, BANDS[b]["rule"], BANDS[b]["reference"]) for b in used_bands],
            "counts": {"items": t["items"]["verdict"].value_counts().to_dict(),
                       "labels": t["labels"]["verdict"].value_counts().to_dict()},
            "num": num, "fmt": fmt}


def _env() -> jinja2.Environment:
    from labelstudy.web import template_folder   # the folder only; no Flask app is created
    return jinja2.Environment(loader=jinja2.FileSystemLoader(str(template_folder())),
                              autoescape=jinja2.select_autoescape(["html"]), undefined=jinja2.StrictUndefined)


def render_report(results, *, comparison=None) -> str:
    """The standalone, self-contained HTML report (prints cleanly to PDF)."""
    ctx = report_context(results, comparison=comparison)
    return _env().get_template("results/report.html").render(css=css_text(), **ctx)
