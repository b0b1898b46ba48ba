"""Write the sample solution files of the community-orchard study (an invented scenario).

Run from anywhere: ``python sample_studies/community_orchards/solution/make_files.py``. It writes, next
to itself:

* ``orchard_solution.xlsx``: sheets items, factors, phi, meta;
* ``orchard_solution.csv`` with ``orchard_solution.factors.csv``, ``.phi.csv``, ``.meta.csv``;
* ``orchard_loadings_only.csv``: the loadings as a statistics package prints them (a blank first header,
  MR1..MR4, h2, u2, com), with no item texts and no factors table.

Planted for the diagnosis: item ``O14`` cross-loads (.45 on F2, .38 on F4); factor F4 has only two
salient items; F2 and F4 correlate .55. The pair F2 "Neighbourly Ties" / F4 "Harvest Sharing" is meant to
be confusable for judges.
"""

from __future__ import annotations

import csv
from pathlib import Path

import numpy as np
import openpyxl

HERE = Path(__file__).resolve().parent
FACTORS = [
    ("F1", "Skill Growth",
     "Volunteering in order to learn and practise orchard skills such as pruning, grafting and pest "
     "control, and to become more competent at growing fruit."),
    ("F2", "Neighbourly Ties",
     "Volunteering in order to meet the people who live nearby, make friends among them and feel part of "
     "a neighbourhood community."),
    ("F3", "Environmental Care",
     "Volunteering in order to look after local nature: pollinators, soil, trees and green space in the "
     "city, for their own sake and for future generations."),
    ("F4", "Harvest Sharing",
     "Volunteering in order to share the orchard's fruit with neighbours and the wider community, so that "
     "fresh food reaches the people living around the orchard."),
]
# id, text, loadings F1..F4, reverse keyed (O09 was recoded before the analysis, so it loads positively)
ITEMS = [
    ("O01", "I come to the orchard to learn pruning and grafting", (0.74, 0.05, 0.08, -0.03), 0),
    ("O02", "I want to get better at recognising tree diseases early", (0.68, -0.04, 0.15, 0.02), 0),
    ("O03", "Working alongside experienced growers teaches me things I could not learn from books",
     (0.62, 0.18, -0.02, 0.04), 0),
    ("O04", "I like trying out new ways of protecting fruit from pests", (0.57, 0.02, 0.19, -0.06), 0),
    ("O05", "The orchard is where I practise skills I hope to use in my own garden",
     (0.66, 0.07, 0.03, 0.10), 0),
    ("O06", "I keep notes on what I learn at each work day", (0.51, -0.08, 0.12, 0.06), 0),
    ("O07", "I have made real friends through the orchard", (0.04, 0.78, -0.03, 0.09), 0),
    ("O08", "Volunteering here means I now know many people on my street", (-0.02, 0.72, 0.05, 0.12), 0),
    ("O09", "I would rather work on my own than chat with other volunteers", (0.10, 0.61, -0.05, 0.01), 1),
    ("O10", "The work days are a chance to catch up with neighbours", (0.06, 0.69, 0.02, 0.15), 0),
    ("O11", "I feel I belong to this neighbourhood because of the orchard", (-0.05, 0.64, 0.17, 0.08), 0),
    ("O12", "I look forward to the shared lunch after a work day", (0.08, 0.55, -0.01, 0.18), 0),
    ("O13", "I volunteer to help pollinators such as bees find food", (0.07, -0.03, 0.76, 0.02), 0),
    ("O14", "I enjoy handing out apples to the families who live around the orchard",
     (0.03, 0.45, 0.06, 0.38), 0),
    ("O15", "Looking after old fruit trees protects them for the next generation", (0.12, 0.04, 0.67, -0.02), 0),
    ("O16", "A city needs green spaces like this one, and I want to keep it healthy",
     (-0.04, 0.10, 0.71, 0.05), 0),
    ("O17", "I care about keeping the orchard soil free of chemicals", (0.16, -0.06, 0.63, 0.08), 0),
    ("O18", "Planting hedges and wildflowers around the trees matters to me", (0.09, 0.02, 0.58, 0.11), 0),
    ("O19", "I help carry the surplus fruit to the local food bank", (0.02, 0.11, 0.07, 0.71), 0),
    ("O20", "It matters to me that no fruit from the orchard goes to waste while people nearby go without",
     (-0.03, 0.08, 0.14, 0.66), 0),
]
PHI = np.array([
    [1.00, 0.21, 0.34, 0.12],
    [0.21, 1.00, 0.18, 0.55],
    [0.34, 0.18, 1.00, 0.26],
    [0.12, 0.55, 0.26, 1.00],
])
META = [("extraction", "minres"), ("rotation", "oblimin"), ("n", "412"),
        ("software", "statistics package export, invented data")]


def communality(loadings) -> tuple[float, float, float]:
    """h2 = l' Phi l for an oblique pattern, u2 = 1 - h2, Hofmann's complexity (sum l^2)^2 / sum l^4."""
    lam = np.asarray(loadings)
    h2 = float(lam @ PHI @ lam)
    com = float((lam ** 2).sum() ** 2 / (lam ** 4).sum())
    return round(h2, 2), round(1 - h2, 2), round(com, 2)


def write_csv(path: Path, rows) -> None:
    with path.open("w", newline="", encoding="utf-8") as fh:
        csv.writer(fh).writerows(rows)


def main() -> None:
    ids = [f[0] for f in FACTORS]
    items_rows = [["item", "text", *ids, "reverse"]]
    items_rows += [[i, t, *(f"{x:.2f}" for x in lam), r] for i, t, lam, r in ITEMS]
    factor_rows = [["factor", "name", "definition"], *[list(f) for f in FACTORS]]
    phi_rows = [["", *ids]] + [[ids[a], *(f"{x:.2f}" for x in PHI[a])] for a in range(len(ids))]
    meta_rows = [["key", "value"], *[list(m) for m in META]]

    write_csv(HERE / "orchard_solution.csv", items_rows)
    write_csv(HERE / "orchard_solution.factors.csv", factor_rows)
    write_csv(HERE / "orchard_solution.phi.csv", phi_rows)
    write_csv(HERE / "orchard_solution.meta.csv", meta_rows)

    wb = openpyxl.Workbook()
    sheets = {"items": items_rows, "factors": factor_rows, "phi": phi_rows, "meta": meta_rows}
    first = True
    for name, rows in sheets.items():
        ws = wb.active if first else wb.create_sheet()
        ws.title = name
        first = False
        for r in rows:
            ws.append([_cell(v) for v in r])
    wb.save(HERE / "orchard_solution.xlsx")

    mr = [f"MR{k}" for k in range(1, 5)]
    only = [["", *mr, "h2", "u2", "com"]]
    only += [[i, *(f"{x:.2f}" for x in lam), *(f"{v:.2f}" for v in communality(lam))]
             for i, _, lam, _ in ITEMS]
    write_csv(HERE / "orchard_loadings_only.csv", only)


def _cell(v):
    """Numbers as numbers in the workbook (ids and texts stay text)."""
    if isinstance(v, str):
        try:
            return float(v) if v and v[0] in "-0123456789" and not v.startswith("O") else v
        except ValueError:
            return v
    return v


if __name__ == "__main__":
    main()
