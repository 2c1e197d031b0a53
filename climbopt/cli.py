"""Command line: the only place that prints or exits. Exit codes: 0 ok, 2 bad input,
3 infeasible mission, 4 solver failure."""

from __future__ import annotations

import click

from climbopt import CAUTION, __version__


@click.group()
@click.version_option(__version__, prog_name="climbopt")
def cli():
    """climbopt: how to climb -- minimum-time and minimum-fuel climb schedules."""


def main():  # console-script entry point
    cli()


# ---- climbopt check -------------------------------------------------------------------------


@cli.command("check")
@click.argument("scenario_file", metavar="SCENARIO")
def check(scenario_file: str):
    """Read SCENARIO, print what was understood (in the file's units), or list every problem.

    Exit code 0 when the file is valid, 2 when it is not.
    """
    from climbopt.scenario import ScenarioError, describe_scenario, load_scenario

    try:
        scenario = load_scenario(scenario_file)
        text = describe_scenario(scenario)
    except ScenarioError as exc:
        n = len(exc.problems)
        click.echo(f"error: {exc.path}: {n} problem{'s' if n != 1 else ''} found:", err=True)
        for fld, msg in exc.problems:
            click.echo(f"  {fld}: {msg}", err=True)
        raise SystemExit(2) from None
    except Exception as exc:  # never show a traceback to the user
        click.echo(f"error: {scenario_file}: could not check the scenario: {type(exc).__name__}: {exc}",
                   err=True)
        raise SystemExit(2) from None
    click.echo(text)
    click.echo("")
    click.echo(f"OK: {scenario_file} is a valid scenario.")
    click.echo(f"Caution: {CAUTION}")
