"""Materials constants for the strength models, shipped as TOML and extendable by the user.

The shipped file ``materials.toml`` holds, for each material class, the shear modulus G,
Burgers vector b, Poisson ratio ν, Taylor factor M, Hall–Petch σ₀ and k (with standard
uncertainties), the grain-size convention k belongs to and the grain-size range the constants
hold over. Every value carries its source. A user file in the same layout adds entries or
replaces shipped ones; an entry may set ``base = "name"`` to inherit the fields it omits.

This module parses TOML *text*; reading files happens at the edges (:func:`load_materials`
reads only the file it is given and the packaged data).
"""

from __future__ import annotations

import math
import tomllib
from dataclasses import dataclass
from importlib import resources
from pathlib import Path

from ..errors import InputError, OptionError
from .hall_petch import GRAIN_SIZE_CONVENTIONS


class MaterialsFileError(InputError, ValueError):
    """A materials TOML file is malformed; the message names the file, entry and key."""


@dataclass(frozen=True)
class Quantity:
    """A constant with its standard uncertainty and its source.

    ``log_sd`` set: the value is the median of a log-normal spread with that standard
    deviation of ln(value) (a between-study spread); ``sd`` is then value × log_sd.
    """

    value: float
    sd: float
    source: str
    log_sd: float | None = None

    def to_dict(self) -> dict:
        out = {"value": self.value, "sd": self.sd, "source": self.source}
        if self.log_sd is not None:
            out["log_sd"] = self.log_sd
        return out


_QUANTITIES = (
    "shear_modulus_gpa",
    "burgers_nm",
    "poisson_ratio",
    "taylor_factor",
    "sigma0_mpa",
    "k_mpa_sqrt_m",
)


@dataclass(frozen=True)
class Material:
    """Constants of one material class (see ``materials.toml`` for the sources)."""

    name: str
    description: str
    structure: str
    grain_size_convention: str
    yield_definition: str
    shear_modulus_gpa: Quantity
    burgers_nm: Quantity
    poisson_ratio: Quantity
    taylor_factor: Quantity
    sigma0_mpa: Quantity
    k_mpa_sqrt_m: Quantity
    grain_size_range_um: tuple[float, float]
    grain_size_range_source: str
    shearing_diameter_nm: float = 0.0
    shearing_diameter_source: str = "not given (all particles treated as non-shearable)"
    sigma0_k_correlation: float = 0.0
    sigma0_k_correlation_source: str = "not given (σ0 and k taken as independent)"
    origin: str = "shipped"

    def to_dict(self) -> dict:
        out = {
            "name": self.name,
            "description": self.description,
            "structure": self.structure,
            "grain_size_convention": self.grain_size_convention,
            "yield_definition": self.yield_definition,
            "grain_size_range_um": {
                "value": list(self.grain_size_range_um),
                "source": self.grain_size_range_source,
            },
            "shearing_diameter_nm": {
                "value": self.shearing_diameter_nm,
                "source": self.shearing_diameter_source,
            },
            "sigma0_k_correlation": {
                "value": self.sigma0_k_correlation,
                "source": self.sigma0_k_correlation_source,
            },
            "origin": self.origin,
        }
        for key in _QUANTITIES:
            out[key] = getattr(self, key).to_dict()
        return out


def burgers_vector_nm(lattice_parameter_nm: float, structure: str) -> float:
    """Burgers vector of the usual slip system from the lattice parameter a.

    FCC b = a/√2, BCC b = a·√3/2, HCP ⟨a⟩ slip b = a (REFERENCES §6, crystallography).
    """
    factors = {"fcc": 1.0 / math.sqrt(2.0), "bcc": math.sqrt(3.0) / 2.0, "hcp": 1.0}
    try:
        return lattice_parameter_nm * factors[structure.lower()]
    except KeyError:
        raise OptionError(
            f"Unknown crystal structure {structure!r}; use fcc, bcc or hcp."
        ) from None


def shear_modulus_from_elastic_gpa(youngs_modulus_gpa: float, poisson_ratio: float) -> float:
    """Isotropic shear modulus G = E / (2(1 + ν)) in GPa."""
    return youngs_modulus_gpa / (2.0 * (1.0 + poisson_ratio))


def _fail(origin: str, name: str, key: str, why: str) -> MaterialsFileError:
    return MaterialsFileError(f"In {origin}, material [{name}] key {key!r} {why}.")


def _quantity(raw: dict, name: str, key: str, origin: str) -> Quantity:
    item = raw.get(key)
    if not isinstance(item, dict) or "value" not in item:
        raise _fail(origin, name, key, 'must be a table {value = ..., sd = ..., source = "..."}')
    try:
        value = float(item["value"])
        log_sd = float(item["log_sd"]) if "log_sd" in item else None
        sd = float(item["sd"]) if "sd" in item else abs(value) * (log_sd or 0.0)
    except (TypeError, ValueError):
        raise _fail(origin, name, key, "needs numeric value and sd") from None
    if log_sd is not None and not (math.isfinite(log_sd) and log_sd >= 0 and value >= 0):
        raise _fail(origin, name, key, "needs a non-negative value and log_sd")
    if not (math.isfinite(value) and math.isfinite(sd)) or sd < 0:
        raise _fail(origin, name, key, "needs a finite value and a non-negative sd")
    if key != "sigma0_mpa" and value <= 0:
        raise _fail(origin, name, key, f"must be positive, got {value!r}")
    if key == "poisson_ratio" and not value < 0.5:
        raise _fail(origin, name, key, f"must be below 0.5, got {value!r}")
    source = str(item.get("source", "")).strip()
    if not source:
        raise _fail(origin, name, key, 'needs a source (write "from memory" if recalled)')
    return Quantity(value, sd, source, log_sd)


def _material(name: str, raw: dict, origin: str) -> Material:
    for key in (
        "description",
        "structure",
        "grain_size_convention",
        "grain_size_range_um",
        *_QUANTITIES,
    ):
        if key not in raw:
            raise _fail(origin, name, key, "is missing")
    convention = raw["grain_size_convention"]
    if convention not in GRAIN_SIZE_CONVENTIONS:
        choices = ", ".join(sorted(GRAIN_SIZE_CONVENTIONS))
        raise _fail(origin, name, "grain_size_convention", f"must be one of: {choices}")
    rng = raw["grain_size_range_um"]
    try:
        lo, hi = (float(v) for v in rng["value"])
    except (TypeError, ValueError, KeyError):
        raise _fail(
            origin, name, "grain_size_range_um", 'must be {value = [low, high], source = "..."}'
        ) from None
    if not 0 < lo < hi:
        raise _fail(origin, name, "grain_size_range_um", "needs 0 < low < high")
    shear = raw.get("shearing_diameter_nm", {})
    corr = raw.get("sigma0_k_correlation", {})
    try:
        rho = float(corr.get("value", 0.0)) if isinstance(corr, dict) else float("nan")
    except (TypeError, ValueError):
        rho = float("nan")
    if not -1.0 <= rho <= 1.0:
        raise _fail(
            origin, name, "sigma0_k_correlation", 'must be {value = r, source = "..."}, -1 ≤ r ≤ 1'
        )
    return Material(
        name=name,
        description=str(raw["description"]),
        structure=str(raw["structure"]).lower(),
        grain_size_convention=convention,
        yield_definition=str(raw.get("yield_definition", "not stated")),
        grain_size_range_um=(lo, hi),
        grain_size_range_source=str(rng.get("source", "not stated")),
        shearing_diameter_nm=float(shear.get("value", 0.0)),
        shearing_diameter_source=str(shear.get("source", Material.shearing_diameter_source)),
        sigma0_k_correlation=rho,
        sigma0_k_correlation_source=str(
            corr.get("source", Material.sigma0_k_correlation_source)
        ),
        origin=origin,
        **{key: _quantity(raw, name, key, origin) for key in _QUANTITIES},
    )


def parse_materials(
    text: str, *, origin: str, known: dict[str, dict] | None = None
) -> dict[str, dict]:
    """Parse materials TOML text into raw entries, resolving ``base = "..."`` inheritance.

    Returns raw (validated later) tables keyed by name; ``known`` holds entries that
    ``base`` may refer to.
    """
    try:
        data = tomllib.loads(text)
    except tomllib.TOMLDecodeError as exc:
        raise MaterialsFileError(f"{origin} is not valid TOML ({exc}); fix the syntax.") from None
    known = dict(known or {})
    out: dict[str, dict] = {}
    for name, raw in data.items():
        if not isinstance(raw, dict):
            raise MaterialsFileError(
                f"In {origin}, top-level key {name!r} is not a material table; "
                f"write it as [{name}]."
            )
        raw = dict(raw)
        base = raw.pop("base", None)
        if base is not None:
            parent = out.get(base) or known.get(base)
            if parent is None:
                raise _fail(origin, name, "base", f"names unknown material {base!r}")
            raw = {**parent, **raw}
        out[name] = raw
    return out


def load_materials(materials_file: str | Path | None = None) -> dict[str, Material]:
    """The shipped materials, plus (and overridden by) the entries of ``materials_file``.

    Parameters
    ----------
    materials_file : path, optional
        A TOML file in the layout of the shipped ``materials.toml``.

    Returns
    -------
    dict of str to Material
        Sorted by name.
    """
    shipped_text = (
        resources.files("sectio.strength").joinpath("materials.toml").read_text(encoding="utf-8")
    )
    raw = parse_materials(shipped_text, origin="shipped materials.toml")
    origins = dict.fromkeys(raw, "shipped")
    if materials_file is not None:
        path = Path(materials_file)
        try:
            text = path.read_text(encoding="utf-8")
        except OSError as exc:
            raise MaterialsFileError(
                f"Cannot read materials file {str(path)!r} ({exc.strerror}); check the path."
            ) from None
        user = parse_materials(text, origin=str(path), known=raw)
        raw.update(user)
        origins.update(dict.fromkeys(user, str(path)))
    return {name: _material(name, raw[name], origins[name]) for name in sorted(raw)}


def get_material(name: str | Material, materials_file: str | Path | None = None) -> Material:
    """Look up a material by name (shipped or from ``materials_file``)."""
    if isinstance(name, Material):
        return name
    materials = load_materials(materials_file)
    if name not in materials:
        raise OptionError(
            f"Unknown material {name!r}; choose one of: {', '.join(materials)} "
            "(or add it with --materials FILE)."
        )
    return materials[name]


def material_toml(name: str, entries: dict, *, base: str | None = None) -> str:
    """TOML text of one material entry (for saving fitted constants).

    ``entries`` maps keys to either plain values or {value, sd, source} tables.
    """
    lines = [f"[{name}]"]
    if base:
        lines.append(f"base = {_toml_value(base)}")
    for key, value in entries.items():
        if isinstance(value, dict):
            inner = ", ".join(f"{k} = {_toml_value(v)}" for k, v in value.items())
            lines.append(f"{key} = {{ {inner} }}")
        else:
            lines.append(f"{key} = {_toml_value(value)}")
    return "\n".join(lines) + "\n"


def _toml_value(value) -> str:
    if isinstance(value, str):
        return '"' + value.replace("\\", "\\\\").replace('"', '\\"') + '"'
    if isinstance(value, bool):
        return "true" if value else "false"
    if isinstance(value, (list, tuple)):
        return "[" + ", ".join(_toml_value(v) for v in value) + "]"
    return repr(float(value))
