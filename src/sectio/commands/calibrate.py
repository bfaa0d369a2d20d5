"""The ``calibrate`` command: µm per pixel of an objective, stored for later runs.

``sectio calibrate IMAGE --objective 50x --division 10um`` measures a stage-micrometer
image (the ruling's line period); ``--scale-bar 100um`` (or ``auto``) measures a scale bar
instead. The result goes into the calibration file under the objective's name, with the
date, who measured it and how; ``--objective 50x`` on ``grains`` / ``particles`` (or
``objective = "50x"`` in a study file) then uses it.
"""

from __future__ import annotations

import click

from ._calibration import ENV_FILE


@click.command("calibrate", context_settings={"help_option_names": ["-h", "--help"]})
@click.argument("image", type=click.Path(dir_okay=False))
@click.option("--objective", required=True, help="Name to store the calibration under, e.g. 50x.")
@click.option("--division", default=None,
              help="Spacing of neighbouring lines of the stage micrometer, e.g. 10um "
                   "(a 1 mm ruling in 100 divisions).")
@click.option("--scale-bar", default=None,
              help="Instead of a ruling: the length of the image's scale bar, e.g. 100um, or "
                   "auto to read it from the strip's text.")
@click.option("--calibration-file", default=None, type=click.Path(dir_okay=False),
              help=f"Calibration file to write (default: ${ENV_FILE}, else the per-user "
                   "file).")
@click.option("--microscope", default=None, help="Microscope name, recorded with the value.")
@click.option("--by", "measured_by", default=None,
              help="Who measured it (default: the login name).")
@click.option("--dry-run", is_flag=True, help="Measure and print; do not write the file.")
def calibrate_command(image, objective, division, scale_bar, calibration_file, microscope,
                      measured_by, dry_run):
    """Measure µm per pixel of an objective from a stage micrometer or a scale bar.

    Example:  sectio calibrate micrometer_50x.tif --objective 50x --division 10um
    """
    from ..calibration import calibrate_objective

    rec, path, old = calibrate_objective(
        image, objective=objective, division=division, scale_bar=scale_bar,
        calibration_file=calibration_file, microscope=microscope, measured_by=measured_by,
        write=not dry_run)
    unc = rec["relative_uncertainty"]
    click.echo(f"objective {objective}: {rec['pixel_size_um']:.6g} um per pixel "
               f"(± {100 * unc:.2g} %, {rec['method']})")
    if old and "pixel_size_um" in old:
        change = rec["pixel_size_um"] / float(old["pixel_size_um"]) - 1
        click.echo(f"previous value {float(old['pixel_size_um']):.6g} um per pixel "
                   f"({old.get('measured', 'undated')}): {100 * change:+.2f} %")
    click.echo(("not written (--dry-run): " if dry_run else "written to ") + str(path))
    return 0
