"""``labelstudy demo``: build the community-orchard demonstration project and serve it."""

from __future__ import annotations

from pathlib import Path

import click

__all__ = ["demo"]


@click.command("demo")
@click.option("--dir", "directory", default="labelstudy-demo", show_default=True,
              type=click.Path(file_okay=False, path_type=Path),
              help="Folder for the demo project; a folder made by an earlier demo is rebuilt from scratch.")
@click.option("--no-serve", is_flag=True, help="Only build the project; do not start the web server.")
@click.option("--port", default=8150, show_default=True, type=int)
@click.option("--host", default="127.0.0.1", show_default=True,
              help="Address to listen on; the default serves this machine only.")
@click.pass_context
def demo(ctx: click.Context, directory: Path, no_serve: bool, port: int, host: str) -> None:
    """Build a demo project: the community-orchard study, round 1 open, ten of twelve simulated judges
    answered and submitted, two still to answer. Prints the researcher address, password and judge links,
    then serves the project (unless --no-serve)."""
    from labelstudy.cli import default_base_url, domain_errors, serve_cmd
    from labelstudy.demo import build_demo

    base = default_base_url(host, port)
    result = domain_errors(build_demo)(directory, base_url=base)
    pending = [link for link in result.links if link.pending]
    done = len(result.links) - len(pending)
    click.echo(f"{'Rebuilt' if result.recreated else 'Created'} demo project {result.path.resolve()}")
    click.echo(f"Study: {result.n_items} statements, {result.n_factors} factors. Round 1 is open with "
               f"{len(result.links)} judges: {done} submitted, {len(pending)} still to answer.")
    click.echo("")
    click.echo(f"Researcher pages:    {result.researcher_url}")
    click.echo(f"Researcher password: {result.password}")
    click.echo("")
    click.echo("Judge links (the judges still to answer come first; open one to try the judge's form):")
    width = max(len(link.name) for link in result.links)
    for link in result.links:
        mark = "STILL TO ANSWER ->" if link.pending else "                  "
        click.echo(f"  {mark} {link.name:<{width}}  {link.status:<12} {link.link}")
    if no_serve:
        click.echo("")
        click.echo(f"Serve it later with: labelstudy serve {result.path} --host {host} --port {port}")
        return
    click.echo("")
    ctx.invoke(serve_cmd, project_dir=result.path, host=host, port=port)
