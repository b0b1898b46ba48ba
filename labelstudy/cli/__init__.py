"""The ``labelstudy`` command line: a thin layer over the same functions the web app calls.

Domain errors (any :class:`labelstudy.errors.LabelstudyError`) become one-line messages and exit code 1.
"""

from __future__ import annotations

import json
import sys
from functools import wraps
from pathlib import Path

import click

from labelstudy.errors import LabelstudyError


def domain_errors(fn):
    """Turn our own errors into a one-line ClickException (no traceback)."""
    @wraps(fn)
    def wrapper(*args, **kwargs):
        try:
            return fn(*args, **kwargs)
        except LabelstudyError as exc:
            raise click.ClickException(str(exc)) from None
    return wrapper


@click.group(help="Expert-judge studies of factor labels after an exploratory factor analysis.")
@click.version_option(package_name="labelstudy")
def main() -> None:
    pass


@main.command("init")
@click.argument("project_dir", type=click.Path(file_okay=False, path_type=Path))
@click.option("--password", help="Researcher password (default: a random one, printed once).")
@domain_errors
def init_cmd(project_dir: Path, password: str | None) -> None:
    """Create PROJECT_DIR with its database, researcher password and secret key (mode 0600)."""
    from labelstudy.project import init_project
    project, pw = init_project(project_dir, password=password)
    click.echo(f"Created project {project.path}")
    click.echo(f"Researcher password: {pw}")
    click.echo("Keep it safe: it is stored only as a salted hash.")


def default_base_url(host: str, port: int) -> str:
    shown = "127.0.0.1" if host in ("0.0.0.0", "::", "") else host
    return f"http://{shown}:{port}"


@main.command("serve")
@click.argument("project_dir", type=click.Path(exists=True, file_okay=False, path_type=Path))
@click.option("--host", default="127.0.0.1", show_default=True,
              help="Address to listen on; the default serves this machine only.")
@click.option("--port", default=8150, show_default=True, type=int)
@click.option("--threads", default=8, show_default=True, type=int, help="Waitress worker threads.")
@click.option("--base-url", help="Public address used in judge links (default http://HOST:PORT).")
@domain_errors
def serve_cmd(project_dir: Path, host: str, port: int, threads: int, base_url: str | None) -> None:
    """Serve PROJECT_DIR's researcher pages and judge form with waitress."""
    import waitress
    from labelstudy.web import create_app
    url = (base_url or default_base_url(host, port)).rstrip("/")
    app = create_app(project_dir, {"BASE_URL": url})
    click.echo(f"Serving {project_dir} at {url}/ (researcher pages at {url}/r/); press Ctrl+C to stop.",
               err=True)
    waitress.serve(app, host=host, port=port, threads=threads, ident="labelstudy",
                   channel_timeout=120, connection_limit=500)


@main.command("links")
@click.argument("project_dir", type=click.Path(exists=True, file_okay=False, path_type=Path))
@click.option("--round", "round_number", type=int, help="Round number (default: every round).")
@click.option("--study", "study_id", type=int, help="Study id (default: every study).")
@click.option("--base-url", default="http://127.0.0.1:8150", show_default=True)
@click.option("--json", "as_json", is_flag=True, help="Print JSON for machines.")
@domain_errors
def links_cmd(project_dir: Path, round_number: int | None, study_id: int | None, base_url: str,
              as_json: bool) -> None:
    """Print every judge's name, status and personal link."""
    from labelstudy.links import judge_links
    from labelstudy.project import open_project
    rows = judge_links(open_project(project_dir).store(), base_url, study_id=study_id, round_number=round_number)
    if as_json:
        click.echo(json.dumps(rows, indent=2))
        return
    if not rows:
        click.echo("No judges yet.")
    for r in rows:
        click.echo(f"{r['study_id']}/{r['round']:<3} {r['name'][:28]:<28} {r['status']:<22} {r['link']}")


@main.command("backup")
@click.argument("project_dir", type=click.Path(exists=True, file_okay=False, path_type=Path))
@click.option("--to", "target", required=True, type=click.Path(dir_okay=False, path_type=Path),
              help="File to write the copy to.")
@domain_errors
def backup_cmd(project_dir: Path, target: Path) -> None:
    """Copy the project database with SQLite's online backup API (safe while the server runs)."""
    from labelstudy.project import open_project
    store = open_project(project_dir).store()
    out = store.backup(target)
    click.echo(f"Backed up {store.path} to {out}")


def _register() -> None:
    for module, name in (("labelstudy.cli.solution", "solution"), ("labelstudy.cli.demo", "demo"),
                         ("labelstudy.cli.report", "report")):
        try:
            mod = __import__(module, fromlist=[name])
        except ImportError as exc:  # a part not yet installed in this checkout
            if module not in str(exc):
                raise
            continue
        main.add_command(getattr(mod, name))


_register()
