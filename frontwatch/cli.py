"""The `frontwatch` command: one typer app; each group of commands lives in frontwatch/commands/."""

from __future__ import annotations

import typer

from .commands import analysis, core, live, simulate

app = typer.Typer(add_completion=False, no_args_is_help=True,
                  help="Detect sea- and lake-breeze fronts in station networks and forecast their arrival.")

core.register(app)
live.register(app)
simulate.register(app)
analysis.register(app)


def main() -> None:
    app()


if __name__ == "__main__":
    main()
