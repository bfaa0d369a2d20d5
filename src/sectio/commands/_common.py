"""Small pieces shared by the command modules (number formatting, the image-memory option)."""

from __future__ import annotations


def echo_skipped(image: str, exc: Exception) -> None:
    """Say on stderr that a field was skipped, and why."""
    import click

    click.echo(f"{image}: skipped: {exc}", err=True)


def progress_bar(items, *, desc: str, unit: str = "field"):
    """``items`` wrapped in a tqdm progress bar on stderr; off when stderr is not a terminal
    (pipes, logs, CI), so output files and captured output stay clean."""
    import sys

    from tqdm import tqdm

    items = list(items)
    return tqdm(items, desc=desc, unit=unit, file=sys.stderr, leave=False,
                disable=not sys.stderr.isatty() or len(items) < 1, dynamic_ncols=True)


def fmt(value, spec: str) -> str:
    """Format a number for a printed table; ``-`` for a missing value."""
    return "-" if value is None else format(value, spec)


def _set_image_memory(ctx, param, value):
    if value is not None:
        import os

        from .._decode import ENV_BUDGET, parse_bytes

        os.environ[ENV_BUDGET] = str(parse_bytes(value))  # workers inherit it
    return value


def max_image_memory_option(f):
    """``--max-image-memory``: the budget of decoded pixels checked before any decode."""
    import click

    return click.option(
        "--max-image-memory", default=None, expose_value=False, is_eager=True,
        callback=_set_image_memory,
        help="Largest decoded image accepted, e.g. 4GiB [default: 1.5GiB of float pixels, "
             "or $SECTIO_MAX_IMAGE_MEMORY].")(f)



def csv_dialect_option(f):
    """``--csv-dialect``: delimiter and decimal mark of every CSV file a command writes."""
    import click

    return click.option(
        "--csv-dialect", type=click.Choice(["comma", "semicolon"]), default="comma",
        show_default=True,
        help="CSV files: comma = ',' between values and '.' as decimal mark; semicolon = ';' "
             "between values and ',' as decimal mark (spreadsheets in decimal-comma "
             "locales).")(f)
