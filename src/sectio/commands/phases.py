"""The ``phases`` command: area (= volume) fraction of N grey-level phases per field.

Writes DIR/phases.json (schema ``sectio/phases@1``) and DIR/<field>_phases.png per field.
"""

from __future__ import annotations

import os

import click

from ._calibration import calibration_options
from ._common import echo_skipped, max_image_memory_option


@click.command("phases", context_settings={"help_option_names": ["-h", "--help"]})
@click.argument("images", nargs=-1, required=True, type=click.Path(dir_okay=True))
@click.option("--phases", "n_phases", type=click.IntRange(2, 7), default=3, show_default=True,
              help="Number of grey-level phases (2-7).")
@click.option("--names", default=None,
              help="Names of the phases, darkest first, separated by commas, e.g. "
                   "ferrite,pearlite,martensite (default phase 1, phase 2, ...).")
@click.option("--method", type=click.Choice(["regions", "pixels"]), default="regions",
              show_default=True,
              help="Classify edge-bounded regions by their mean grey (regions) or single "
                   "pixels (pixels).")
@click.option("--grid-points", type=click.IntRange(16, 10000), default=100, show_default=True,
              help="Points of the systematic point-count grid per field (ASTM E562).")
@click.option("--pixel-size", default=None,
              help="Pixel size with a unit, e.g. 0.5um (default: the file's metadata).")
@click.option("--scale-bar", default=None,
              help="Length of the scale bar in the info strip, e.g. 2um, or auto.")
@click.option("--crop-bottom", type=int, default=0, show_default=True,
              help="Rows of an info strip to drop from the bottom.")
@click.option("--out", "out_dir", required=True, type=click.Path(file_okay=False),
              help="Folder for phases.json and the overlay pictures.")
@click.option("--seed", type=int, default=0, show_default=True,
              help="Seed of the point-count grid offset.")
@max_image_memory_option
@calibration_options
@click.pass_context
def phases_command(ctx, images, n_phases, names, method, grid_points, pixel_size, scale_bar,
                   crop_bottom, out_dir, seed, calibration_options):
    """Area (= volume) fraction of each grey-level phase, with an E562 point count beside.

    Example:  sectio phases field*.tif --phases 3 --names ferrite,pearlite,martensite --out res
    """
    import json

    from ..errors import InputError, OptionError
    from ..micrograph import load
    from ..phases import measure_phases, overlay_png, summarize_phases
    from ..report import atomic_write_bytes
    from ..report._safe import prepare_out_dir
    from ..specimen import overlay_name

    name_list = [n.strip() for n in names.split(",")] if names else None
    if name_list is not None and len(name_list) != n_phases:
        raise OptionError(f"--names gives {len(name_list)} names for --phases {n_phases}; "
                          "give one name per phase, darkest first, separated by commas.")
    out = prepare_out_dir(out_dir)
    calibration = {"pixel_size": pixel_size, "scale_bar": scale_bar, "crop_bottom": crop_bottom,
                   **calibration_options}
    fields, failed, used = [], [], set()
    for i, path in enumerate(images):
        try:
            f = measure_phases(load(path, **calibration), n_phases, method=method,
                               grid_points=grid_points, names=name_list, seed=seed + i)
        except OptionError:
            raise
        except InputError as exc:
            failed.append({"image": os.fspath(path), "reason": str(exc)})
            echo_skipped(os.fspath(path), exc)
            continue
        except Exception as exc:  # noqa: BLE001 - one field's fault never ends the run
            from ..report._safe import unexpected_failure

            reason = unexpected_failure(path, exc)
            failed.append({"image": os.fspath(path), "reason": reason})
            echo_skipped(os.fspath(path), InputError(reason))
            continue
        png = overlay_name(os.fspath(path), used, suffix="_phases")
        atomic_write_bytes(out / png, overlay_png(f))
        d = f.to_dict()
        d["overlay_png"] = png
        fields.append((f, d))
    summary = summarize_phases([f for f, _ in fields])
    doc = {"schema": "sectio/phases@1", "n_phases": n_phases, "method": method,
           "grid_points": grid_points, "fields": [d for _, d in fields], "failed": failed,
           "summary": summary,
           "notes": ["area fraction = volume fraction on a random section (Delesse)",
                     "point count: systematic grid, boundary points score 1/2 (ASTM E562)"]}
    atomic_write_bytes(out / "phases.json", json.dumps(doc, indent=2).encode())
    _print(doc)
    if failed or any(d["probably_wrong"] for d in doc["fields"]):
        ctx.exit(1)
    return 0


def _print(doc) -> None:
    for d in doc["fields"]:
        parts = "  ".join(f"{p['name']} {100 * p['area_fraction']:.1f} % "
                          f"(points {100 * p['point_fraction']:.1f} %)" for p in d["phases"])
        click.echo(f"{os.path.basename(d['image'])[:28]:<28} {parts}  {'; '.join(d['flags'])}")
    for fl in doc["failed"]:
        click.echo(f"{os.path.basename(fl['image'])[:28]:<28} failed: {fl['reason']}")
    s = doc["summary"]
    for p in s["phases"]:
        ci = p.get("area_fraction_ci95") or [None, None]
        ci_txt = f"[{100 * ci[0]:.1f}, {100 * ci[1]:.1f}] %" if None not in ci else "no CI"
        pci = p.get("point_fraction_ci95") or [None, None]
        pci_txt = f"[{100 * pci[0]:.1f}, {100 * pci[1]:.1f}] %" if None not in pci else "no CI"
        click.echo(f"summary {p['name']}: A_A {100 * p['area_fraction']:.2f} %, 95 % CI "
                   f"{ci_txt} ({s['basis']}); P_P {100 * p['point_fraction']:.2f} %, 95 % CI "
                   f"{pci_txt}")
