"""Readable text summary of a ``sectio/strength@1`` document (display rounding only)."""

from __future__ import annotations

from ..units import mpa_to_ksi


def _fmt(value_mpa: float, units: str) -> str:
    return f"{mpa_to_ksi(value_mpa):.1f} ksi" if units == "ksi" else f"{value_mpa:.0f} MPa"


def format_summary(doc: dict, units: str = "mpa") -> str:
    """A readable summary of a ``sectio/strength@1`` document."""
    y = doc["yield_mpa"]
    lo, hi = y["ci95"]
    material = doc["inputs"]["material"]["name"]
    mc = doc["inputs"]["monte_carlo"]
    lines = [
        f"Yield strength estimate for {material}: {_fmt(y['median'], units)} "
        f"(95 % interval {_fmt(lo, units)} to {_fmt(hi, units)}; "
        f"{mc['draws']} Monte Carlo draws, seed {mc['seed']})",
        "  contributions (median, 95 % interval):",
    ]
    for name, c in doc["contributions_mpa"].items():
        if name == "superposition":
            continue
        lines.append(
            f"    {name:<16} {_fmt(c['median'], units):>10}  "
            f"[{_fmt(c['ci95'][0], units)}, {_fmt(c['ci95'][1], units)}]"
        )
    sup = doc["contributions_mpa"]["superposition"]
    lines.append(
        f"  superposition: {sup['rule']} (q = {sup['exponent']:g}) over "
        f"{', '.join(sup['combined_terms']) or 'no obstacle terms'}; others add"
    )
    hp = doc["inputs"].get("hall_petch")
    if hp:
        lines.append(
            f"  Hall–Petch: d = {hp['grain_size_um']:.3g} µm "
            f"({hp['grain_size_convention']}, "
            f"×{hp['grain_size_conversion']['factor_to_mean_intercept']:g} "
            f"the mean lineal intercept), k = {hp['k_mpa_sqrt_m']:.3g} MPa·m^½"
        )
    ow = doc["inputs"].get("orowan")
    if ow:
        spacing = f", spacing {ow['spacing']} = {ow['spacing_nm']:.3g} nm" if ow["spacing"] else ""
        lines.append(f"  Orowan: {ow['form']}{spacing}")
    shares = sorted(doc["variance_share"].items(), key=lambda kv: -kv[1])
    lines.append("  share of variance: " + ", ".join(f"{k} {v:.0%}" for k, v in shares if v > 0))
    for w in doc["warnings"]:
        lines.append(f"  warning: {w}")
    lines.append(f"  CAUTION: {doc['caution']}")
    return "\n".join(lines)
