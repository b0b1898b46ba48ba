"""Plots of a scored round: PNG bytes, alt text and the table each plot was drawn from.

matplotlib runs on the Agg backend (set before anything else of matplotlib is imported) and figures are
built with :class:`matplotlib.figure.Figure` directly, never through pyplot's global state, so drawing is
safe in the web server's threads. Colour maps are "cividis" (readable in grey and by colour-blind
readers); every heatmap cell carries its number, and point plots use distinct marker shapes, so no plot
relies on colour alone.
"""

from __future__ import annotations

import base64
import io
import threading
from collections import OrderedDict
from dataclasses import dataclass

import matplotlib

matplotlib.use("Agg")

import numpy as np  # noqa: E402
import pandas as pd  # noqa: E402
from matplotlib.backends.backend_agg import FigureCanvasAgg  # noqa: E402
from matplotlib.figure import Figure  # noqa: E402
from scipy.cluster.hierarchy import dendrogram  # noqa: E402

from labelstudy.agreement.cvi import meets_icvi_standard  # noqa: E402

__all__ = ["Plot", "round_plots", "confusion_plot", "co_occurrence_plot", "icvi_plot", "judges_plot"]

CMAP = "cividis"
_CACHE: "OrderedDict[tuple, tuple]" = OrderedDict()
_LOCK = threading.Lock()


@dataclass(frozen=True, eq=False)
class Plot:
    """One figure: ``name`` (file-safe), ``title``, ``png`` bytes, ``alt`` text and its source ``table``."""

    name: str
    title: str
    png: bytes
    alt: str
    table: pd.DataFrame

    @property
    def data_uri(self) -> str:
        return "data:image/png;base64," + base64.b64encode(self.png).decode("ascii")


def _png(fig: Figure) -> bytes:
    FigureCanvasAgg(fig)
    buf = io.BytesIO()
    fig.savefig(buf, format="png", dpi=100, metadata={"Software": None})
    return buf.getvalue()


def _annotate(ax, values: np.ndarray, fmt: str, vmax: float) -> None:
    for (r, c), v in np.ndenumerate(values):
        if np.isfinite(v):
            ax.text(c, r, format(v, fmt), ha="center", va="center", fontsize=7,
                    color="black" if v > 0.55 * vmax else "white")


def confusion_plot(confusion: pd.DataFrame, names: dict[str, str]) -> Plot:
    """Heatmap of placements: intended factor (rows) x assigned label (columns), counts in the cells."""
    mat = confusion.set_index("intended")
    vals = mat.to_numpy(dtype=float)
    fig = Figure(layout="constrained", figsize=(1.2 + 0.9 * vals.shape[1], 1.0 + 0.6 * vals.shape[0]))
    ax = fig.add_subplot()
    vmax = max(vals.max(), 1)
    im = ax.imshow(vals, cmap=CMAP, vmin=0, vmax=vmax, aspect="auto")
    _annotate(ax, vals, ".0f", vmax)
    ax.set_xticks(range(vals.shape[1]), [str(c) for c in mat.columns])
    ax.set_yticks(range(vals.shape[0]), [f"{r} {names.get(r, '')}"[:28] for r in mat.index])
    ax.set_xlabel("assigned by judges")
    ax.set_ylabel("intended factor")
    fig.colorbar(im, ax=ax, label="placements")
    diag = sum(mat.loc[r, r] for r in mat.index if r in mat.columns)
    total = vals.sum()
    off = [(r, c, mat.loc[r, c]) for r in mat.index for c in mat.columns if c != r]
    worst = max(off, key=lambda x: x[2]) if off else None
    alt = (f"Heatmap of label-matching placements, intended factor by assigned label. {diag:.0f} of "
           f"{total:.0f} placements are on the intended factor.")
    if worst and worst[2] > 0:
        alt += f" The largest off-diagonal cell: items of {worst[0]} placed under {worst[1]} {worst[2]:.0f} times."
    return Plot("confusion", "Intended x assigned (label matching)", _png(fig), alt, confusion)


def co_occurrence_plot(co: pd.DataFrame, linkage) -> Plot:
    """Open-sort co-occurrence heatmap, items ordered by the consensus dendrogram drawn above it."""
    mat = co.set_index("item")
    fig = Figure(layout="constrained", figsize=(1.5 + 0.32 * len(mat), 2.4 + 0.3 * len(mat)))
    gs = fig.add_gridspec(2, 1, height_ratios=[1, 3.5])
    axd = fig.add_subplot(gs[0])
    order = list(range(len(mat)))
    if linkage is not None and len(mat) >= 2:
        d = dendrogram(linkage, ax=axd, no_labels=True, color_threshold=0, above_threshold_color="#444444")
        order = d["leaves"]
    axd.set_axis_off()
    ax = fig.add_subplot(gs[1])
    vals = mat.to_numpy(dtype=float)[np.ix_(order, order)]
    labs = [str(mat.index[i]) for i in order]
    im = ax.imshow(vals, cmap=CMAP, vmin=0, vmax=1, aspect="auto")
    _annotate(ax, np.round(vals * 100), ".0f", 100)
    ax.set_xticks(range(len(labs)), labs, rotation=90, fontsize=7)
    ax.set_yticks(range(len(labs)), labs, fontsize=7)
    fig.colorbar(im, ax=[axd, ax], label="share of judges who grouped the pair", shrink=0.6)
    off = vals[~np.eye(len(vals), dtype=bool)]
    alt = (f"Heatmap of how often judges put two items in the same pile (percent in each cell), {len(mat)} "
           f"items ordered by the average-linkage dendrogram shown above the heatmap; pairs grouped by "
           f"every judge: {int((off >= 1 - 1e-9).sum() // 2)}.")
    table = mat.iloc[order, order].reset_index()
    return Plot("co_occurrence", "Open sort: co-occurrence with its dendrogram", _png(fig), alt, table)


def icvi_plot(items: pd.DataFrame) -> Plot:
    """I-CVI per item with the standard line; items below the standard drawn with a different marker."""
    t = items[["item", "i_cvi", "icvi_standard"]].dropna(subset=["i_cvi"]).reset_index(drop=True)
    fig = Figure(layout="constrained", figsize=(7, 1.6 + 0.22 * len(t)))
    ax = fig.add_subplot()
    y = np.arange(len(t))[::-1]
    below = pd.Series([not meets_icvi_standard(v, s) for v, s in zip(t["i_cvi"], t["icvi_standard"])],
                      index=t.index)
    ax.scatter(t["i_cvi"][~below], y[~below], marker="o", s=36, color="#00204d", label="meets the standard")
    ax.scatter(t["i_cvi"][below], y[below], marker="X", s=60, color="#b8a400", edgecolor="black",
               linewidths=0.6, label="below the standard")
    stds = sorted(set(t["icvi_standard"].dropna()))
    for s in stds:
        ax.axvline(s, linestyle="--", color="black", linewidth=1, label=f"I-CVI standard {s:.2f}")
    ax.set_yticks(y, t["item"], fontsize=7)
    ax.set_xlim(-0.02, 1.05)
    ax.set_xlabel("I-CVI (share of judges rating the item 3 or 4)")
    fig.legend(loc="outside lower center", ncols=3, fontsize=7)
    n_below = int(below.sum())
    alt = (f"Dot plot of the I-CVI of {len(t)} items with a dashed line at the standard "
           f"({', '.join(f'{s:.2f}' for s in stds)}); {n_below} item(s) fall below it"
           + (": " + ", ".join(t.loc[below, "item"]) if n_below else "") + ".")
    return Plot("icvi", "I-CVI per item", _png(fig), alt, t)


def judges_plot(judges: pd.DataFrame) -> Plot:
    """Each judge's agreement with the key (circles) and kappa with the panel (squares); flagged judges
    are named in the labels."""
    t = judges[["judge", "agreement_with_key", "kappa_loo", "outlier"]].reset_index(drop=True)
    fig = Figure(layout="constrained", figsize=(7, 1.6 + 0.3 * len(t)))
    ax = fig.add_subplot()
    y = np.arange(len(t))[::-1]
    ax.scatter(t["agreement_with_key"], y + 0.12, marker="o", s=40, color="#00204d",
               label="agreement with the key (hit ratio)")
    ax.scatter(t["kappa_loo"], y - 0.12, marker="s", s=40, facecolor="white", edgecolor="#7d6b00",
               linewidths=1.5, hatch="////", label="kappa with the rest of the panel")
    ax.set_yticks(y, [f"{j} (flagged)" if o else str(j) for j, o in zip(t["judge"], t["outlier"])], fontsize=7)
    ax.axvline(0, color="grey", linewidth=0.8)
    ax.set_xlim(min(-0.1, float(np.nanmin(t[["agreement_with_key", "kappa_loo"]].to_numpy(dtype=float),
                                          initial=0)) - 0.05), 1.05)
    ax.set_xlabel("agreement")
    fig.legend(loc="outside lower center", ncols=2, fontsize=7)
    flagged = [str(j) for j, o in zip(t["judge"], t["outlier"]) if o]
    alt = (f"Dot plot of {len(t)} judges' agreement with the key (circles) and with the rest of the panel "
           f"(squares); flagged as outliers: {', '.join(flagged) if flagged else 'none'}.")
    return Plot("judges", "Judges: agreement with the key and with the panel", _png(fig), alt, t)


def round_plots(results) -> tuple[Plot, ...]:
    """Every plot the round's data allows (cached per results key)."""
    with _LOCK:
        if results.key in _CACHE:
            _CACHE.move_to_end(results.key)
            return _CACHE[results.key]
    names = {f["id"]: f["name"] for f in results.meta["factors"]}
    t = results.tables
    plots = []
    if "confusion" in t and len(t["confusion"]):
        plots.append(confusion_plot(t["confusion"], names))
    if "co_occurrence" in t and len(t["co_occurrence"]) >= 2:
        plots.append(co_occurrence_plot(t["co_occurrence"], results.linkage))
    if "i_cvi" in t["items"].columns and t["items"]["i_cvi"].notna().any():
        plots.append(icvi_plot(t["items"]))
    j = t["judges"]
    if len(j) and j[["agreement_with_key", "kappa_loo"]].notna().any().any():
        plots.append(judges_plot(j))
    out = tuple(plots)
    with _LOCK:
        _CACHE[results.key] = out
        while len(_CACHE) > 8:
            _CACHE.popitem(last=False)
    return out
