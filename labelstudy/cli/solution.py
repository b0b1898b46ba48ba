"""``labelstudy solution``: commands about an EFA solution file.

``solution check FILE`` imports the file as a study would (but lets a missing item-text column pass,
so raw statistics-package output can be checked) and prints the diagnosis: each item's primary and
secondary factor and flags, each factor's salient item count and flags, and notes.
"""

from __future__ import annotations

import json

import click

from labelstudy.errors import LabelstudyError
from labelstudy.solution import FACTOR_FLAGS, ITEM_FLAGS, Thresholds, diagnose, load_solution

__all__ = ["solution", "check"]

_D = Thresholds()

solution = click.Group("solution", help="Import and check an exploratory factor analysis solution.")


def _fmt(x) -> str:
    return "" if x is None or x != x else f"{x:+.2f}"


def _table(header: list[str], rows: list[list[str]]) -> list[str]:
    widths = [max(len(str(c)) for c in col) for col in zip(header, *rows)]
    line = lambda cells: "  ".join(str(c).ljust(w) for c, w in zip(cells, widths)).rstrip()  # noqa: E731
    return [line(header), line(["-" * w for w in widths]), *(line(r) for r in rows)]


@solution.command("check")
@click.argument("file", type=click.Path(dir_okay=True, path_type=str))
@click.option("--factors", "factors_path", type=click.Path(path_type=str), help="Factors table file.")
@click.option("--phi", "phi_path", type=click.Path(path_type=str), help="Factor correlation (phi) file.")
@click.option("--meta", "meta_path", type=click.Path(path_type=str), help="Metadata (key,value) file.")
@click.option("--json", "as_json", is_flag=True, help="Print the diagnosis as JSON.")
@click.option("--salient", type=click.FloatRange(0, 1), default=_D.salient, show_default=True,
              help="Smallest |loading| counted as salient.")
@click.option("--cross-secondary", type=click.FloatRange(0, 1), default=_D.cross_secondary,
              show_default=True, help="A second |loading| at or above this is a cross-loading.")
@click.option("--cross-gap", type=click.FloatRange(0, 1), default=_D.cross_gap, show_default=True,
              help="First minus second |loading| below this is a cross-loading.")
@click.option("--min-items", type=click.IntRange(1), default=_D.min_items, show_default=True,
              help="Fewest salient items a factor should have.")
@click.option("--phi-high", type=click.FloatRange(0, 1), default=_D.phi_high, show_default=True,
              help="|phi| at or above this questions whether two factors are distinct.")
def check(file, factors_path, phi_path, meta_path, as_json, salient, cross_secondary, cross_gap,
          min_items, phi_high):
    """Read FILE (.xlsx, .json, .csv/.tsv or a folder of CSV tables) and print its diagnosis."""
    try:
        sol = load_solution(file, factors=factors_path, phi=phi_path, meta=meta_path, require_text=False)
        diag = diagnose(sol, Thresholds(salient=salient, cross_secondary=cross_secondary,
                                        cross_gap=cross_gap, min_items=min_items, phi_high=phi_high))
    except LabelstudyError as e:
        raise click.ClickException(str(e)) from None
    if as_json:
        out = {"source": sol.source, **diag.to_dict(), "import_notes": list(sol.notes)}
        click.echo(json.dumps(out, indent=2, ensure_ascii=False))
        return
    meta = ", ".join(f"{k}={v}" for k, v in sol.meta)
    click.echo(f"{sol.source}: {len(sol.items)} items, {len(sol.factors)} factors"
               + (f" ({meta})" if meta else ""))
    for note in sol.notes:
        click.echo(f"  import: {note}")
    click.echo("")
    rows = [[r.item, r.primary, _fmt(r.primary_loading), r.secondary or "", _fmt(r.secondary_loading),
             ", ".join(r.flags)] for r in diag.items.itertuples(index=False)]
    for line in _table(["item", "primary", "loading", "secondary", "loading", "flags"], rows):
        click.echo(line)
    click.echo("")
    rows = [[r.factor, r.name, str(r.salient_items), ", ".join(r.flags)]
            for r in diag.factors.itertuples(index=False)]
    for line in _table(["factor", "name", "salient", "flags"], rows):
        click.echo(line)
    used = sorted({f for fl in diag.items["flags"] for f in fl}
                  | {f.split(":")[0] for fl in diag.factors["flags"] for f in fl})
    if used:
        click.echo("")
        for code in used:
            click.echo(f"  {code}: {ITEM_FLAGS.get(code) or FACTOR_FLAGS.get(code)}")
    if diag.notes:
        click.echo("")
        click.echo("Notes:")
        for note in diag.notes:
            click.echo(f"  - {note}")
