"""``sectio synth``: synthetic micrographs with exact ground truth (for checks and demos)."""

from __future__ import annotations

from pathlib import Path

import click

from ..errors import OptionError


class _SynthGroup(click.Group):
    def get_command(self, ctx, name):
        if name == "particles":
            from .synth_particles import synth_particles_command

            return synth_particles_command
        return super().get_command(ctx, name)

    def list_commands(self, ctx):
        return sorted(set(super().list_commands(ctx)) | {"particles"})


@click.group("synth", cls=_SynthGroup, context_settings={"help_option_names": ["-h", "--help"]})
def synth_group():
    """Make synthetic micrographs with exact ground truth."""


@synth_group.command("grains")
@click.option(
    "--out",
    "out_dir",
    required=True,
    type=click.Path(file_okay=False),
    help="Folder for the images and their truth JSON.",
)
@click.option("--size", default="1024x1024", show_default=True, help="Image size, WIDTHxHEIGHT.")
@click.option(
    "--grains",
    "n_grains",
    type=int,
    default=300,
    show_default=True,
    help="Number of grains (seeds) per image.",
)
@click.option(
    "--kind",
    type=click.Choice(["voronoi", "hardcore", "duplex"]),
    default="voronoi",
    show_default=True,
    help="Grain structure.",
)
@click.option(
    "--stretch",
    type=float,
    default=1.0,
    show_default=True,
    help="Elongation along x (2 = a 2:1 rolled structure).",
)
@click.option(
    "--contrast",
    type=click.Choice(["boundaries", "grains"]),
    default="boundaries",
    show_default=True,
    help="Etched boundary grooves, or shade contrast only.",
)
@click.option(
    "--boundary-width",
    type=float,
    default=2.0,
    show_default=True,
    help="Groove width at half depth, pixels.",
)
@click.option("--bright-boundaries", is_flag=True, help="Render boundaries brighter than grains.")
@click.option(
    "--pixel-size",
    default="0.5um",
    show_default=True,
    help="Pixel size written into the TIFF resolution tags.",
)
@click.option(
    "--twins",
    type=float,
    default=0.0,
    show_default=True,
    help="Share of the grains (large enough) that get annealing twin bands; the truth "
    "then gives the intercept with and without twin boundaries.",
)
@click.option("--fields", type=int, default=1, show_default=True, help="Number of images.")
@click.option("--seed", type=int, default=0, show_default=True)
@click.option("--prefix", default="grains", show_default=True, help="File name prefix.")
def synth_grains_command(
    out_dir,
    size,
    n_grains,
    kind,
    stretch,
    contrast,
    boundary_width,
    bright_boundaries,
    pixel_size,
    twins,
    fields,
    seed,
    prefix,
):
    """Etched grain structures (Voronoi, hard-core, duplex) with their exact label maps.

    Writes PREFIX_NN.tif (calibrated TIFF), PREFIX_NN_labels.tif (with --twins also
    PREFIX_NN_twin_labels.tif, every twin band its own region) and PREFIX_NN_truth.json
    holding the true mean lineal intercept and grains per mm².
    """
    import numpy as np

    from ..report import write_json
    from ..stereology import (
        astm_g_from_grains_per_mm2,
        astm_g_from_intercept_um,
        count_crossings,
        planimetric_count,
    )
    from ..synth import write_calibrated_tiff
    from ..synth.grains import synthetic_grains
    from ..units import parse_length_um

    try:
        w, h = (int(v) for v in size.lower().split("x"))
    except ValueError:
        raise OptionError(f"--size {size!r} is not WIDTHxHEIGHT; use e.g. 1024x768.") from None
    if min(w, h) < 64 or n_grains < 2:
        raise OptionError("--size must be at least 64x64 and --grains at least 2.")
    px_um = parse_length_um(pixel_size, what="--pixel-size")
    out = Path(out_dir)
    out.mkdir(parents=True, exist_ok=True)
    rng = np.random.default_rng(seed)
    from ._common import progress_bar

    for k in progress_bar(range(1, fields + 1), desc="synthetic fields"):
        img, truth = synthetic_grains(
            (h, w),
            n_grains,
            rng=rng,
            kind=kind,
            stretch=stretch,
            contrast=contrast,
            boundary_width_px=boundary_width,
            bright_boundaries=bright_boundaries,
            twins=dict(twinned_fraction=twins) if twins > 0 else None,
        )
        stem = f"{prefix}_{k:02d}"
        write_calibrated_tiff(out / f"{stem}.tif", img, px_um)
        import tifffile

        tifffile.imwrite(out / f"{stem}_labels.tif", truth.labels.astype(np.uint32))
        if truth.twin_labels is not None:
            tifffile.imwrite(
                out / f"{stem}_twin_labels.tif", truth.twin_labels.astype(np.uint32)
            )
        counts = count_crossings(truth.labels)
        l_um = counts.mean_intercept_px * px_um
        na = planimetric_count(truth.labels).grains_per_mm2(px_um)
        write_json(
            out / f"{stem}_truth.json",
            {
                "schema": "sectio/synth-grains-truth@1",
                "image": f"{stem}.tif",
                "pixel_size_um": px_um,
                "kind": kind,
                "stretch": stretch,
                "contrast": contrast,
                "seed": seed,
                "field": k,
                "grain_count": truth.n_grains,
                "mean_intercept_um": l_um,
                "grains_per_mm2": na,
                "astm_g_intercept": float(astm_g_from_intercept_um(l_um)),
                "astm_g_planimetric": float(astm_g_from_grains_per_mm2(na)),
                "twinned_fraction": twins,
                "mean_intercept_with_twins_um": (
                    count_crossings(truth.twin_labels).mean_intercept_px * px_um
                    if truth.twin_labels is not None
                    else l_um
                ),
            },
        )
        click.echo(f"{stem}.tif  {truth.n_grains} grains  true mean intercept {l_um:.3g} um")
