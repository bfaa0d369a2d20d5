"""The ``strength``, ``fit-hall-petch`` and ``materials`` commands (thin: parse, call, write).

numpy, scipy and matplotlib are imported inside the command bodies so that ``sectio --help``
stays fast.
"""

from __future__ import annotations

import io
import json
from pathlib import Path

import click

from ..errors import OptionError, ResultFileError
from ..report import atomic_write_bytes, write_json
from ..strength.choices import (
    CONVENTION_CHOICES,
    GRAIN_SIZE_MEASURE_CHOICES,
    OROWAN_CHOICES,
    SCOPE_CHOICES,
    SPACING_CHOICES,
    SUPERPOSITION_CHOICES,
)
from ..units import parse_value_sd


def _read_json_doc(path: str, maker: str):
    """The parsed JSON of a result file; unreadable or broken files get one sentence."""
    try:
        return json.loads(Path(path).read_text(encoding="utf-8"))
    except OSError as exc:
        raise ResultFileError(f"Cannot read {path!r} ({exc.strerror}); check the path.") from None
    except json.JSONDecodeError as exc:
        raise ResultFileError(
            f"{path!r} is not valid JSON (line {exc.lineno}); re-create it with {maker}."
        ) from None


def _read_summary(path: str, schema: str) -> dict:
    doc = _read_json_doc(path, "sectio")
    if not isinstance(doc, dict) or doc.get("schema") != schema:
        found = doc.get("schema") if isinstance(doc, dict) else None
        raise ResultFileError(
            f"{path!r} has schema {found!r}, expected {schema!r}; pass the "
            "file sectio wrote for this measurement."
        )
    if not isinstance(doc.get("summary"), dict):
        raise ResultFileError(f"{path!r} has no 'summary' object; re-run the measurement.")
    return doc["summary"]


@click.command("strength")
@click.option(
    "--grains",
    "grains_path",
    type=click.Path(dir_okay=False),
    help="grains.json of the specimen (mean lineal intercept and its CI).",
)
@click.option(
    "--grain-size",
    help="Grain size typed in instead of --grains, VALUE[+-SE] (µm, or a G number with "
    "--grain-size-measure astm_g).",
)
@click.option(
    "--grain-size-measure",
    type=click.Choice(GRAIN_SIZE_MEASURE_CHOICES),
    default="mean_lineal_intercept",
    show_default=True,
    help="What --grain-size is: mean lineal intercept (µm), equivalent circle diameter of "
    "the mean grain section (µm) or ASTM E112 grain size number G.",
)
@click.option(
    "--hall-petch-fit",
    "fit_path",
    type=click.Path(dir_okay=False),
    help="hall_petch_fit.json from fit-hall-petch: its σ0, k and their covariance replace "
    "the material's (the Monte Carlo keeps their correlation).",
)
@click.option(
    "--particles",
    "particles_path",
    type=click.Path(dir_okay=False),
    help="particles.json of the specimen (adds the Orowan term).",
)
@click.option("--material", required=True, help="Material name (see `sectio materials`).")
@click.option(
    "--materials",
    "materials_file",
    type=click.Path(dir_okay=False),
    help="TOML file adding or replacing material entries.",
)
@click.option(
    "--out",
    "out_dir",
    required=True,
    type=click.Path(file_okay=False),
    help="Directory for strength.json.",
)
@click.option("--seed", default=0, show_default=True, type=int, help="Monte Carlo seed.")
@click.option("--draws", default=20000, show_default=True, type=int, help="Monte Carlo draws.")
@click.option(
    "--units",
    type=click.Choice(["mpa", "ksi"]),
    default="mpa",
    show_default=True,
    help="Units of the printed summary (the JSON is always MPa).",
)
@click.option(
    "--orowan-form",
    type=click.Choice(OROWAN_CHOICES),
    default="line_tension",
    show_default=True,
    help="Orowan bypass formula.",
)
@click.option(
    "--spacing",
    type=click.Choice(SPACING_CHOICES),
    help="Particle spacing formula [default: planar_edge if particles_per_um2 is "
    "measured, else spheres_edge_rms].",
)
@click.option(
    "--superposition",
    type=click.Choice(SUPERPOSITION_CHOICES),
    default="linear",
    show_default=True,
    help="How obstacle terms combine.",
)
@click.option("--exponent", type=float, help="q of the power superposition (1 to 2).")
@click.option(
    "--scope",
    type=click.Choice(SCOPE_CHOICES),
    default="obstacles",
    show_default=True,
    help="Terms the superposition rule combines (the rest add linearly).",
)
@click.option(
    "--grain-size-convention",
    type=click.Choice(CONVENTION_CHOICES),
    help="Express d (and k) in this convention [default: the material's].",
)
@click.option("--friction", help="Lattice friction stress, VALUE[+-SD] (replaces σ0).")
@click.option("--solid-solution", help="Solid-solution stress, VALUE[+-SD] (with --friction).")
@click.option("--dislocation-density", help="Dislocation density in m^-2, VALUE[+-SD].")
@click.option(
    "--taylor-alpha",
    default=0.3,
    show_default=True,
    type=float,
    help="α of the Taylor dislocation term.",
)
@click.option(
    "--shearing-size",
    type=float,
    help="Particle diameter (nm) below which particles are flagged as shearable.",
)
@click.option(
    "--allow-nanocrystalline",
    is_flag=True,
    help="Compute even below 0.1 µm, where Hall–Petch breaks down.",
)
def strength_command(
    grains_path,
    grain_size,
    grain_size_measure,
    fit_path,
    particles_path,
    material,
    materials_file,
    out_dir,
    seed,
    draws,
    units,
    orowan_form,
    spacing,
    superposition,
    exponent,
    scope,
    grain_size_convention,
    friction,
    solid_solution,
    dislocation_density,
    taylor_alpha,
    shearing_size,
    allow_nanocrystalline,
):
    """Estimate yield strength from grains and/or particles with a 95 % interval.

    Give --grains (or --grain-size), --particles, or both; the output says which
    strengthening terms are missing.
    """
    from .._checks import check_number
    from ..strength import estimate_from_summaries
    from ..strength.measured import grain_intercept_from
    from ..strength.summary import format_summary

    seed = check_number(seed, what="--seed", name="seed")
    draws = check_number(draws, what="--draws", name="draws")
    taylor_alpha = check_number(taylor_alpha, what="--taylor-alpha", name="taylor_alpha")
    if exponent is not None:
        exponent = check_number(exponent, what="--exponent", name="exponent")
    if shearing_size is not None:
        shearing_size = check_number(shearing_size, what="--shearing-size",
                                     name="shearing_size_nm", open_low=True)
    if grains_path and grain_size:
        raise OptionError("Give either --grains or --grain-size, not both.")
    if not (grains_path or grain_size or particles_path):
        raise OptionError(
            "Nothing to estimate from: give --grains FILE (or --grain-size VALUE), "
            "--particles FILE, or both."
        )
    grains = _read_summary(grains_path, "sectio/grains@1") if grains_path else None
    if grain_size:
        value, se = parse_value_sd(grain_size, what="--grain-size", stress=False)
        mv = grain_intercept_from(value, se, measure=grain_size_measure)
        grains = {"mean_intercept_um": mv.value, "mean_intercept_se_um": mv.se,
                  "source": mv.source}
    particles = _read_summary(particles_path, "sectio/particles@1") if particles_path else None
    fit_doc = _read_fit_json(fit_path) if fit_path else None
    est = estimate_from_summaries(
        grains,
        particles,
        hall_petch_fit=fit_doc,
        material=material,
        materials_file=materials_file,
        seed=seed,
        draws=draws,
        orowan_form=orowan_form,
        spacing=spacing,
        superposition=superposition,
        exponent=exponent,
        scope=scope,
        grain_size_convention=grain_size_convention,
        friction_mpa=parse_value_sd(friction, what="--friction"),
        solid_solution_mpa=parse_value_sd(solid_solution, what="--solid-solution"),
        dislocation_density_per_m2=parse_value_sd(
            dislocation_density, what="--dislocation-density", stress=False
        ),
        taylor_alpha=taylor_alpha,
        shearing_diameter_nm=shearing_size,
        allow_nanocrystalline=allow_nanocrystalline,
    )
    doc = est.to_dict()
    doc["inputs"]["files"] = {
        "grains": str(grains_path) if grains_path else None,
        "grain_size": None
        if not grain_size
        else {"text": grain_size, "measure": grain_size_measure},
        "particles": particles_path,
        "materials": materials_file,
        "hall_petch_fit": fit_path,
    }
    out = Path(out_dir) / "strength.json"
    write_json(out, doc, sort_keys=True)
    click.echo(format_summary(doc, units))
    click.echo(f"wrote {out}")


def _read_fit_json(path: str) -> dict:
    doc = _read_json_doc(path, "fit-hall-petch")
    if not isinstance(doc, dict) or doc.get("schema") != "sectio/hall-petch-fit@1":
        raise ResultFileError(
            f"{path!r} is not a sectio/hall-petch-fit@1 document; pass the "
            "hall_petch_fit.json written by sectio fit-hall-petch."
        )
    return doc


def _read_fit_csv(path: str):
    import csv

    p = Path(path)
    try:
        text = p.read_text(encoding="utf-8-sig")
    except OSError as exc:
        raise ResultFileError(f"Cannot read {path!r} ({exc.strerror}); check the path.") from None
    lines = text.splitlines()
    # Spreadsheets write ';' (and a decimal comma) in many locales, ',' or tab elsewhere.
    first = lines[0] if lines else ""
    delimiter = max((";", ",", "\t"), key=first.count) if first else ","
    rows = list(csv.DictReader(lines, delimiter=delimiter))

    def number(text):
        text = text.strip()
        if delimiter != ",":
            text = text.replace(",", ".")
        return float(text)

    header = set(rows[0]) if rows else set()
    if "yield_mpa" not in header or not ({"grain_size_um", "grains_json"} & header):
        raise ResultFileError(
            f"{path!r} needs a header with grain_size_um (or grains_json) and "
            "yield_mpa columns, one row per specimen."
        )
    cols: dict[str, list] = {"d": [], "y": [], "d_sd": [], "y_sd": []}
    for line, row in enumerate(rows, start=2):
        try:
            if row.get("grain_size_um", "").strip():
                d = number(row["grain_size_um"])
                d_sd = (
                    number(row["grain_size_sd_um"])
                    if (row.get("grain_size_sd_um") or "").strip()
                    else None
                )
            else:
                summary = _read_summary(
                    str(p.parent / row["grains_json"].strip()), "sectio/grains@1"
                )
                from ..strength import grain_intercept_um

                mv = grain_intercept_um(summary)
                d, d_sd = mv.value, mv.se
            y = number(row["yield_mpa"])
            y_sd = number(row["yield_sd_mpa"]) if (row.get("yield_sd_mpa") or "").strip() else None
        except (TypeError, ValueError, AttributeError):
            raise ResultFileError(
                f"{path!r} line {line}: a value is missing or not a number; fix the row."
            ) from None
        for key, value in (("d", d), ("y", y), ("d_sd", d_sd), ("y_sd", y_sd)):
            cols[key].append(value)
    d_sd = cols["d_sd"] if all(v is not None for v in cols["d_sd"]) else None
    y_sd = cols["y_sd"] if all(v is not None for v in cols["y_sd"]) else None
    return cols["d"], cols["y"], d_sd, y_sd


def _fit_correlation(fit) -> float:
    (vaa, vab), (_, vbb) = fit.covariance
    return float(vab / (vaa * vbb) ** 0.5) if vaa > 0 and vbb > 0 else 0.0


@click.command("fit-hall-petch")
@click.argument("data_csv", type=click.Path(dir_okay=False))
@click.option(
    "--out",
    "out_dir",
    required=True,
    type=click.Path(file_okay=False),
    help="Directory for hall_petch_fit.json, the plot and the material entry.",
)
@click.option(
    "--errors-in-variables",
    is_flag=True,
    help="Use the grain_size_sd_um column (York / orthogonal-distance fit).",
)
@click.option(
    "--grain-size-convention",
    type=click.Choice(CONVENTION_CHOICES),
    default="mean_lineal_intercept",
    show_default=True,
    help="What the grain sizes in the CSV are.",
)
@click.option(
    "--name",
    default="fitted-hall-petch",
    show_default=True,
    help="Name of the saved material entry.",
)
@click.option(
    "--base",
    help="Material whose other constants (G, b, ν, M) the entry inherits; "
    "needed to save the entry.",
)
@click.option(
    "--materials",
    "materials_file",
    type=click.Path(dir_okay=False),
    help="TOML file with extra materials (for --base).",
)
def fit_hall_petch_command(
    data_csv, out_dir, errors_in_variables, grain_size_convention, name, base, materials_file
):
    """Fit Hall–Petch σ0 and k to DATA.csv (grain_size_um, yield_mpa per specimen)."""
    from ..strength import fit_hall_petch, get_material, material_toml
    from ..strength.plot import hall_petch_figure

    d, y, d_sd, y_sd = _read_fit_csv(data_csv)
    fit = fit_hall_petch(
        d,
        y,
        grain_size_sd_um=d_sd,
        yield_sd_mpa=y_sd,
        method="york" if errors_in_variables else "ols",
        grain_size_convention=grain_size_convention,
    )
    out = Path(out_dir)
    doc = fit.to_dict()
    doc["data_file"] = str(data_csv)
    doc["material_entry"] = None
    if base:
        get_material(base, materials_file)  # fail early on an unknown base
        source = (
            f"fitted by sectio fit-hall-petch to {Path(data_csv).name} (n = {fit.n}, {fit.method})"
        )
        entry = material_toml(
            name,
            {
                "description": f"Hall–Petch constants fitted to {Path(data_csv).name}",
                "grain_size_convention": grain_size_convention,
                "sigma0_mpa": {"value": fit.sigma0_mpa, "sd": fit.sigma0_se_mpa, "source": source},
                "k_mpa_sqrt_m": {
                    "value": fit.k_mpa_sqrt_m,
                    "sd": fit.k_se_mpa_sqrt_m,
                    "source": source,
                },
                "grain_size_range_um": {
                    "value": [min(fit.grain_size_um), max(fit.grain_size_um)],
                    "source": "range of the fitted specimens",
                },
                "sigma0_k_correlation": {
                    "value": _fit_correlation(fit),
                    "source": f"covariance of the fit ({source})",
                },
            },
            base=base,
        )
        atomic_write_bytes(out / "hall_petch_material.toml", entry.encode("utf-8"))
        doc["material_entry"] = {"file": "hall_petch_material.toml", "name": name, "base": base}
    fig = hall_petch_figure(fit)
    png = io.BytesIO()
    fig.savefig(png, format="png", metadata={"Software": None})
    atomic_write_bytes(out / "hall_petch_fit.png", png.getvalue())
    write_json(out / "hall_petch_fit.json", doc, sort_keys=True)
    lo_s, hi_s = fit.sigma0_ci95_mpa
    lo_k, hi_k = fit.k_ci95_mpa_sqrt_m
    click.echo(
        f"Hall–Petch fit ({fit.method}, n = {fit.n}, d = {grain_size_convention}):\n"
        f"  σ0 = {fit.sigma0_mpa:.1f} MPa (95 % CI {lo_s:.1f} to {hi_s:.1f})\n"
        f"  k  = {fit.k_mpa_sqrt_m:.4f} MPa·m^½ (95 % CI {lo_k:.4f} to {hi_k:.4f})\n"
        f"  R² = {fit.r_squared:.4f}, residual sd {fit.residual_sd_mpa:.1f} MPa"
    )
    if not base:
        click.echo("  (give --base MATERIAL to save the constants as a material entry)")
    click.echo(f"  CAUTION: {doc['caution']}")
    click.echo(f"wrote {out / 'hall_petch_fit.json'} and {out / 'hall_petch_fit.png'}")


@click.command("materials")
@click.option(
    "--materials",
    "materials_file",
    type=click.Path(dir_okay=False),
    help="TOML file adding or replacing material entries.",
)
@click.option("--sources", is_flag=True, help="Also print the source of every value.")
def materials_command(materials_file, sources):
    """List the materials the strength models know, with their constants."""
    from ..strength import load_materials

    for name, m in load_materials(materials_file).items():
        lo, hi = m.grain_size_range_um
        click.echo(
            f"{name}  ({m.origin}) {m.description}\n"
            f"    G {m.shear_modulus_gpa.value:g} GPa, b {m.burgers_nm.value:g} nm, "
            f"ν {m.poisson_ratio.value:g}, M {m.taylor_factor.value:g}; "
            f"σ0 {m.sigma0_mpa.value:g} ± {m.sigma0_mpa.sd:g} MPa, "
            f"k {m.k_mpa_sqrt_m.value:g} ± {m.k_mpa_sqrt_m.sd:g} MPa·m^½ "
            f"(d = {m.grain_size_convention}, {lo:g}–{hi:g} µm)"
        )
        if sources:
            for key in (
                "shear_modulus_gpa",
                "burgers_nm",
                "poisson_ratio",
                "taylor_factor",
                "sigma0_mpa",
                "k_mpa_sqrt_m",
            ):
                click.echo(f"      {key}: {getattr(m, key).source}")
            click.echo(f"      grain_size_range_um: {m.grain_size_range_source}")
    click.echo(
        "Values marked 'from memory' were recalled, not looked up; verify them. Predictions "
        "made with these constants are estimates, not a substitute for tensile testing "
        "(ASTM E8/E8M, ISO 6892-1) nor design allowables."
    )
