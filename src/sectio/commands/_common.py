"""Small pieces shared by the command modules (file names, number formatting)."""

from __future__ import annotations

from pathlib import Path


def overlay_name(path: str, used: set[str]) -> str:
    """A unique overlay file name for a field (``<stem>_overlay.png``, then ``_2``...)."""
    stem = Path(path).stem or "field"
    name, i = f"{stem}_overlay.png", 2
    while name in used:
        name, i = f"{stem}_{i}_overlay.png", i + 1
    used.add(name)
    return name


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
