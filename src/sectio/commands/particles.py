"""The ``particles`` command: second-phase particles of one or more fields.

Writes DIR/particles.json (schema ``sectio/particles@1``), DIR/particles.csv (one row per
particle), DIR/<field>_overlay.png per field and DIR/size_distribution.png. numpy,
scikit-image and matplotlib are imported inside the command body.
"""

from __future__ import annotations

import os
import warnings
from pathlib import Path

import click

from ..errors import OptionError
from ._calibration import calibration_options
from ._common import csv_dialect_option, echo_skipped, max_image_memory_option, progress_bar
from ._common import fmt as _fmt


@click.command("particles", context_settings={"help_option_names": ["-h", "--help"]})
@click.argument("images", nargs=-1, required=True, type=click.Path(dir_okay=True))
@click.option("--pixel-size", default=None,
              help="Pixel size with a unit, e.g. 0.02um, 20nm or 8e-7in (default: the "
                   "file's metadata; see 'Calibration' in the README).")
@click.option("--scale-bar", default=None,
              help="Length of the scale bar in the info strip, e.g. 2um, or auto to read it "
                   "from the strip's text; the bar is measured.")
@click.option("--crop-bottom", type=int, default=0, show_default=True,
              help="Rows of an info strip to drop from the bottom (replaces the automatic "
                   "strip search).")
@click.option("--phase", type=click.Choice(["bright", "dark", "auto"]), default="bright",
              show_default=True,
              help="Particles brighter or darker than the matrix; auto: the continuous "
                   "phase is the matrix (the choice is printed and in the JSON).")
@click.option("--method", type=click.Choice(["auto", "half-contrast", "regions"]),
              default="auto", show_default=True,
              help="Threshold method: half-contrast for sparse particles, edge-bounded "
                   "regions for dense structures; auto picks by the particle share.")
@click.option("--threshold", type=float, default=None,
              help="Manual threshold, 0-1 of the flattened image (default: automatic).")
@click.option("--min-size", default=None,
              help="Smallest particle kept, as an equivalent circle diameter, e.g. 0.05um "
                   "(default 3 pixels).")
@click.option("--no-split", is_flag=True, help="Do not split touching particles.")
@click.option("--foil-thickness", default=None,
              help="Thin-foil thickness for projected (TEM) images, e.g. 80nm.")
@click.option("--out", "out_dir", required=True, type=click.Path(file_okay=False),
              help="Folder for particles.json, particles.csv and the pictures.")
@click.option("--seed", type=int, default=0, show_default=True,
              help="Seed of the point-count grid offset and the bootstrap.")
@max_image_memory_option
@csv_dialect_option
@calibration_options
@click.pass_context
def particles_command(ctx, images, pixel_size, scale_bar, crop_bottom, phase, method,
                      threshold, min_size, no_split, foil_thickness, out_dir, seed,
                      csv_dialect, calibration_options):
    """Particle area (= volume) fraction, sizes, spacing and sphere-size unfolding.

    Example:  sectio particles field*.tif --pixel-size 0.02um --phase bright --out results
    """
    from .._checks import check_number
    from ..specimen import measure_images, particles_document, write_result
    from ..units import parse_length_um

    seed = check_number(seed, what="--seed", name="seed")
    if threshold is not None and not 0.0 < threshold < 1.0:
        raise OptionError(f"--threshold {threshold!r} is outside (0, 1); give a grey level of "
                          "the flattened image between 0 and 1, or leave it out.")
    min_size_um = parse_length_um(min_size, what="--min-size") if min_size else None
    foil_um = parse_length_um(foil_thickness, what="--foil-thickness") if foil_thickness \
        else None
    from ..report._safe import prepare_out_dir

    out = prepare_out_dir(out_dir)
    calibration = {"pixel_size": pixel_size, "scale_bar": scale_bar, "crop_bottom": crop_bottom,
                   **calibration_options}
    measure = {"phase": phase, "threshold": threshold, "min_size_um": min_size_um,
               "split": not no_split, "foil_thickness_um": foil_um, "seed": seed,
               "method": method}
    records = measure_images("particles", images, measure, calibration=calibration, out=out,
                             on_skip=echo_skipped, example_pixel_size="0.02um",
                             progress=lambda xs: progress_bar(xs, desc="particles"))
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")  # single-field degeneracy is reported in "basis"
        part = particles_document(records, calibration=calibration, measure=measure, edits=True)
    write_result(out, part, dialect=csv_dialect, image_base=out)
    doc = part.doc
    _print_table(doc["fields"], doc["summary"], doc["failed"])
    suspect = [d for d in doc["fields"] if d.get("probably_wrong")]
    if suspect:
        click.echo(f"{len(suspect)} field(s) probably wrong (see 'suspect_flags' in the "
                   "JSON and the README's list of flags)", err=True)
    if doc["failed"] or suspect:
        ctx.exit(1)
    return 0


def _print_table(fields, summary, failed) -> None:
    click.echo(f"{'field':<28} {'A_A %':>7} {'P_P %':>7} {'N':>6} {'N_A /um2':>9} "
               f"{'ECD um':>8} {'lambda um':>9}  flags")
    for f in fields:
        flag = "; ".join(list(f.get("notes", [])) + list(f["flags"]))
        click.echo(f"{os.path.basename(f['image'])[:28]:<28} {100 * f['area_fraction']:7.2f} "
                   f"{100 * f['point_fraction']:7.2f} {f['particles_counted']:6d} "
                   f"{f['particles_per_um2']:9.4g} {_fmt(f['mean_ecd_um'], '8.4g')} "
                   f"{_fmt(f['mean_free_path_um'], '9.4g')}  {flag}")
    for fl in failed:
        click.echo(f"{Path(fl['image']).name[:28]:<28} failed: {fl['reason']}")
    if fields:
        ci = summary.get("area_fraction_ci95") or [None, None]
        ci_txt = (f"[{100 * ci[0]:.2f}, {100 * ci[1]:.2f}] %" if ci[0] is not None
                  else "no CI")
        msd = summary.get("mean_sphere_diameter_um")
        click.echo(
            f"summary ({summary['n_fields']} field(s), {summary['basis']}): A_A "
            f"{100 * summary['area_fraction']:.2f} %, 95 % CI {ci_txt}; mean ECD "
            f"{_fmt(summary.get('mean_ecd_um'), '.4g')} um; N_A "
            f"{_fmt(summary.get('particles_per_um2'), '.4g')} /um2; mean sphere diameter "
            f"{_fmt(msd, '.4g')} um"
        )
        if summary["flags"]:
            click.echo(f"flagged: {len(summary['flags'])} field(s) — see 'flags' in the JSON")
