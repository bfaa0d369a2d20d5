"""``sectio synth particles``: synthetic sections of sphere dispersions with exact truth.

Writes calibrated TIFFs (``particles_NN.tif``), the exact masks (``particles_NN_mask.png``)
and ``truth.json`` with the 3-D population's N_V, mean sphere diameter and each field's
exact area fraction and section-disc sizes. numpy is imported inside the command.
"""

from __future__ import annotations

from pathlib import Path

import click

from ..errors import OptionError


@click.command("particles", context_settings={"help_option_names": ["-h", "--help"]})
@click.option("--out", "out_dir", required=True, type=click.Path(file_okay=False),
              help="Folder for the images and truth.json.")
@click.option("--fields", type=click.IntRange(1, 1000), default=3, show_default=True)
@click.option("--size", "size_px", type=click.IntRange(64, 16384), default=1024,
              show_default=True, help="Image side in pixels.")
@click.option("--pixel-size", default="0.02um", show_default=True)
@click.option("--fraction", type=click.FloatRange(0.001, 0.6), default=0.08, show_default=True,
              help="Volume fraction of the spheres.")
@click.option("--median-diameter", default="0.4um", show_default=True,
              help="Median sphere diameter (log-normal).")
@click.option("--sigma-ln", type=click.FloatRange(0.0, 1.0), default=0.25, show_default=True)
@click.option("--overlap", is_flag=True, help="Boolean model (spheres may overlap).")
@click.option("--phase", type=click.Choice(["bright", "dark"]), default="bright",
              show_default=True)
@click.option("--noise", type=click.FloatRange(0.0, 0.5), default=0.03, show_default=True)
@click.option("--scale-bar", default=None, help="Add an info strip with a bar of this length.")
@click.option("--seed", type=int, default=0, show_default=True)
def synth_particles_command(out_dir, fields, size_px, pixel_size, fraction, median_diameter,
                            sigma_ln, overlap, phase, noise, scale_bar, seed):
    """Synthetic particle micrographs (sections through log-normal spheres) with truth."""
    import numpy as np

    from ..report import atomic_write_bytes, png_bytes, write_json
    from ..synth import write_calibrated_tiff
    from ..synth.particles import add_info_strip, section_image, sphere_population
    from ..units import parse_length_um

    px = parse_length_um(pixel_size, what="--pixel-size")
    d50 = parse_length_um(median_diameter, what="--median-diameter")
    if d50 / px < 4:
        raise OptionError(f"--median-diameter {median_diameter} is under 4 pixels of "
                          f"{pixel_size}; use larger particles or smaller pixels.")
    bar_um = parse_length_um(scale_bar, what="--scale-bar") if scale_bar else None
    out = Path(out_dir)
    out.mkdir(parents=True, exist_ok=True)
    rng = np.random.default_rng(seed)
    truth = {"schema": "sectio/synth-particles@1", "seed": seed, "pixel_size_um": px,
             "phase": phase, "fields": []}
    for i in range(fields):
        pop = sphere_population(size_um=(size_px * px, size_px * px), volume_fraction=fraction,
                                median_radius_um=d50 / 2, sigma_ln=sigma_ln, overlap=overlap,
                                rng=rng)
        sec = section_image(pop, pixel_size_um=px, phase=phase, noise=noise, rng=rng)
        name = f"particles_{i + 1:02d}"
        img = sec.image
        if bar_um:
            img = add_info_strip(img, pixel_size_um=px, bar_um=bar_um, rng=rng)
        write_calibrated_tiff(out / f"{name}.tif", img, px,
                              description="sectio synthetic particles (Harrow Forge Ltd demo)")
        atomic_write_bytes(out / f"{name}_mask.png", png_bytes(sec.mask.astype(np.uint8) * 255))
        inside = sec.discs_in_field()
        truth["fields"].append({
            "image": f"{name}.tif", "mask": f"{name}_mask.png",
            "area_fraction": sec.area_fraction, "population": pop.to_dict(),
            "discs_in_field": int(inside.sum()),
            "mean_section_diameter_um": float(sec.disc_diameters_um()[inside].mean())
            if inside.any() else None,
            "info_strip_px": int(img.shape[0] - sec.image.shape[0]),
        })
        click.echo(f"{name}.tif: area fraction {100 * sec.area_fraction:.2f} %, "
                   f"{int(inside.sum())} sections")
    write_json(out / "truth.json", truth)
