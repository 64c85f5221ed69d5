"""The typer application object that every command module registers on."""

from __future__ import annotations

import typer

app = typer.Typer(
    name="coderel",
    help=(
        "Reliability of coded narrative data: codebook, coding sheets, validation, agreement "
        "with intervals, adjudication, reconciled dataset and report. Works offline."
    ),
    no_args_is_help=True,
    add_completion=False,
    pretty_exceptions_enable=False,
    rich_markup_mode=None,
)


def _version(value: bool) -> None:
    if value:
        from coderel._version import __version__

        typer.echo(f"coderel {__version__}")
        raise typer.Exit()


@app.callback()
def _root(
    version: bool = typer.Option(
        False, "--version", callback=_version, is_eager=True, help="Print the version and exit."
    ),
    quiet: bool = typer.Option(
        False,
        "--quiet",
        "-q",
        help="No progress bars and no informational messages on stderr (errors, problems and "
        "warnings are still shown); put it before the command: coderel --quiet agree ...",
    ),
) -> None:
    """Reliability of coded narrative data; every command offers --json; all offline."""
    from coderel.cli.common import set_quiet

    set_quiet(quiet)
