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
