"""The ``grains`` command: grain size of one or more fields of a specimen.

Writes DIR/grains.json (schema ``sectio/grains@1``), DIR/grains.csv (one row per grain)
and DIR/<field>_overlay.png per field; prints a short table. Heavy libraries are imported
inside the command body.
"""

from __future__ import annotations

import warnings
from pathlib import Path

import click

from ..errors import OptionError
from ._calibration import calibration_options
from ._common import csv_dialect_option, echo_skipped, max_image_memory_option, progress_bar
from ._common import fmt as _fmt


def _parse_angles(text: str) -> tuple[float, ...]:
    from ..grains import check_angles

    try:
        angles = [float(a) for a in text.split(",")]
    except ValueError:
        raise OptionError(
            f"--angles {text[:60]!r} is not a comma-separated list of degrees; "
            "use e.g. 0,45,90,135."
        ) from None
    return check_angles(angles, shown=text[:60])


@click.command("grains", context_settings={"help_option_names": ["-h", "--help"]})
@click.argument("images", nargs=-1, required=True, type=click.Path(dir_okay=True))
@click.option(
    "--pixel-size",
    default=None,
    help="Pixel size with a unit, e.g. 0.5um, 500nm, 0.02mm, 2e-5in (default: the file's "
    "metadata; see 'Calibration' in the README).",
)
@click.option(
    "--scale-bar",
    default=None,
    help="Length of the scale bar in the info strip, e.g. 50um, or auto to read it from "
    "the strip's text; the bar is measured.",
)
@click.option(
    "--crop-bottom",
    type=int,
    default=0,
    show_default=True,
    help="Rows of an instrument info strip to drop from the bottom (replaces the "
    "automatic strip search).",
)
@click.option(
    "--boundaries",
    type=click.Choice(["dark", "bright"]),
    default="dark",
    show_default=True,
    help="Boundary lines darker or brighter than the grains.",
)
@click.option(
    "--contrast",
    type=click.Choice(["boundaries", "grains"]),
    default="boundaries",
    show_default=True,
    help="'grains' for images where grains differ by shade and show no boundary lines.",
)
@click.option(
    "--min-grain-size",
    default=None,
    help="Smallest grain kept, as an equivalent circle diameter, e.g. 3um "
    "(default: 5 % of the median grain area).",
)
@click.option(
    "--ridge-scale",
    type=float,
    default=None,
    help="Boundary smoothing scale in pixels (default: chosen per image).",
)
@click.option(
    "--gap",
    type=float,
    default=3.0,
    show_default=True,
    help="Boundary gaps up to about twice this many pixels are closed.",
)
@click.option("--keep-scratches", is_flag=True, help="Do not look for and remove scratches.")
@click.option(
    "--twins",
    type=click.Choice(["exclude", "include"]),
    default="exclude",
    show_default=True,
    help="Annealing twin boundaries left out of the grain size (ASTM E112 practice) or "
    "counted as boundaries. Both intercepts are written either way.",
)
@click.option(
    "--line-spacing",
    type=int,
    default=4,
    show_default=True,
    help="Spacing of the parallel test lines, pixels.",
)
@click.option(
    "--angles",
    default="0,45,90,135",
    show_default=True,
    help="Directions of the straight test lines, degrees.",
)
@click.option(
    "--subregions",
    type=int,
    default=3,
    show_default=True,
    help="n: a single field's CI comes from n x n sub-regions.",
)
@click.option(
    "--out",
    "out_dir",
    required=True,
    type=click.Path(file_okay=False),
    help="Folder for grains.json, grains.csv and the overlays.",
)
@max_image_memory_option
@csv_dialect_option
@calibration_options
@click.pass_context
def grains_command(
    ctx,
    images,
    pixel_size,
    scale_bar,
    crop_bottom,
    boundaries,
    contrast,
    min_grain_size,
    ridge_scale,
    gap,
    keep_scratches,
    twins,
    line_spacing,
    angles,
    subregions,
    out_dir,
    csv_dialect,
    calibration_options,
):
    """Grain size by the mean lineal intercept and planimetric methods.

    Each IMAGE is one field of the same specimen. Reports the mean lineal intercept,
    grains per mm², ASTM E112 and ISO 643 grain size numbers, and over the fields the
    mean, standard deviation, 95 % confidence interval (Student t) and % relative
    accuracy.

    Example:  sectio grains field*.tif --pixel-size 0.5um --out results
    """
    from ..grains import make_options
    from ..specimen import grains_document, measure_images, write_result

    measure_kwargs = {
        "boundaries": boundaries,
        "contrast": contrast,
        "min_grain_size": min_grain_size,
        "line_spacing_px": line_spacing,
        "angles_deg": list(_parse_angles(angles)),
        "ridge_scale_px": ridge_scale,
        "gap_px": gap,
        "remove_scratches": not keep_scratches,
        "subregions": subregions,
        "twins": twins,
    }
    opts = make_options(**measure_kwargs)
    from ..report._safe import prepare_out_dir

    out = prepare_out_dir(out_dir)
    calibration = {"pixel_size": pixel_size, "scale_bar": scale_bar, "crop_bottom": crop_bottom,
                   **calibration_options}
    records = measure_images("grains", images, measure_kwargs, calibration=calibration,
                             out=out, on_skip=echo_skipped, example_pixel_size="0.5um",
                             progress=lambda xs: progress_bar(xs, desc="grains"))
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")  # one-field degeneracy is stated in ci_basis
        part = grains_document(records, calibration=calibration, options=opts, edits=True)
    write_result(out, part, dialect=csv_dialect, image_base=out)
    doc = part.doc
    print_table(doc["fields"], doc["summary"], doc["failed"])
    if doc["failed"]:
        ctx.exit(1)
    return 0


def print_table(dicts, summary, failed) -> None:
    """Print the per-field table and the specimen summary of a grains document."""
    click.echo(
        f"{'field':<28} {'l_bar um':>9} {'crossings':>9} {'grains':>7} "
        f"{'N_A /mm2':>9} {'G(int)':>7} {'G(plan)':>7} {'aniso':>6} {'twin %':>6} "
        f"{'l_bar+twins':>11} {'duplex':>6} {'G(ALA)':>6}"
    )
    for d in dicts:
        click.echo(
            f"{Path(d['image']).name[:28]:<28} {d['mean_intercept_um']:9.4g} "
            f"{d['intercept_count']:9d} {d['grain_count']:7d} {d['grains_per_mm2']:9.4g} "
            f"{d['astm_g_intercept']:7.2f} {d['astm_g_planimetric']:7.2f} "
            f"{d['anisotropy_index']:6.2f} {100 * d.get('twin_boundary_fraction', 0.0):6.1f} "
            f"{d.get('mean_intercept_with_twins_um', d['mean_intercept_um']):11.4g} "
            f"{'yes' if d.get('duplex') else 'no':>6} {d.get('astm_g_largest_grain_ala', 0):6.1f}"
        )
        if d.get("duplex"):
            modes = d["duplex_test"]["modes"]
            click.echo("    duplex: " + "; ".join(
                f"{100 * m['area_fraction']:.0f} % of the area at G {m['astm_g_planimetric']:.1f}"
                for m in modes))
    for fl in failed:
        click.echo(f"{Path(fl['image']).name[:28]:<28} failed: {fl['reason']}")
    if dicts:
        ci = summary.get("mean_intercept_ci95_um") or [None, None]
        gci = summary.get("astm_g_ci95") or [None, None]
        ra = summary.get("relative_accuracy_pct")
        click.echo(
            f"summary ({summary['n_fields']} field(s); CI from {summary['ci_basis']}): "
            f"mean lineal intercept {summary['mean_intercept_um']:.4g} um, 95 % CI "
            f"[{_fmt(ci[0], '.4g')}, {_fmt(ci[1], '.4g')}] um, %RA {_fmt(ra, '.1f')}; "
            f"G {summary['astm_g']:.1f} [{_fmt(gci[0], '.1f')}, {_fmt(gci[1], '.1f')}]"
        )
        click.echo(f"G uses the {summary.get('astm_g_uses', 'mean intercept')} "
                   f"(--twins {summary.get('twins', 'exclude')}); l_bar+twins counts them")
        need = summary.get("fields_for_10pct_relative_accuracy")
        if need:
            click.echo(f"fields needed for 10 % relative accuracy: about {need}")
