"""Calibration options shared by the measuring commands (grains, particles).

``@calibration_options`` adds ``--objective``, ``--calibration-file`` and ``--keep-strip``
and hands them to the command as one ``calibration_options`` dict of keyword arguments
for :func:`sectio.micrograph.load`.
"""

from __future__ import annotations

import functools

import click

from ..calibration import ENV_FILE


def calibration_options(func):
    """Add the objective / calibration-file / keep-strip options to a click command."""

    @functools.wraps(func)
    def wrapper(*args, objective, calibration_file, keep_strip, **kwargs):
        opts = {"objective": objective, "calibration_file": calibration_file,
                "keep_strip": keep_strip}
        return func(*args, calibration_options=opts, **kwargs)

    wrapper = click.option(
        "--keep-strip", is_flag=True,
        help="Measure the instrument's info strip too (by default a strip at the bottom or "
             "top is found and left out).")(wrapper)
    wrapper = click.option(
        "--calibration-file", default=None, type=click.Path(dir_okay=False),
        help=f"Objective calibrations (TOML) written by 'sectio calibrate' (default: "
             f"${ENV_FILE}, else the per-user file).")(wrapper)
    wrapper = click.option(
        "--objective", default=None,
        help="Objective calibrated with 'sectio calibrate', e.g. 50x: its µm/px is used.")(
        wrapper)
    return wrapper
