"""Figures of a study report, drawn from the stored numbers (never recomputed).

Every builder returns a :class:`matplotlib.figure.Figure` on the Agg canvas (pyplot is never
imported, so no display is needed); :func:`png_bytes` turns one into PNG bytes for the HTML
report and the PDF report saves the same figures into its pages.
"""

from __future__ import annotations

import io

import numpy as np

__all__ = ["INK", "PALETTE", "intercept_histogram", "particle_size_histogram", "png_bytes",
           "strength_figure", "trend_figure"]

#: Our colours: ink, then teal, ochre, brick, slate, moss.
INK = "#1d2430"
PALETTE = {"grain": "#1f6f78", "particle": "#b7791f", "yield": "#9b2c2c", "muted": "#5a6472",
           "fit": "#4a7c3a", "band": "#dfe7ea"}


def _figure(w_in: float, h_in: float):
    from matplotlib.figure import Figure

    fig = Figure(figsize=(w_in, h_in), dpi=100)
    fig.patch.set_facecolor("white")
    return fig


def _style(ax) -> None:
    for side in ("top", "right"):
        ax.spines[side].set_visible(False)
    ax.tick_params(labelsize=8, colors=INK)
    ax.grid(True, color="#e6e9ee", linewidth=0.6)
    ax.set_axisbelow(True)


def png_bytes(fig, *, dpi: int = 100) -> bytes:
    """PNG bytes of a figure (no metadata, so the bytes depend only on the content)."""
    buf = io.BytesIO()
    fig.savefig(buf, format="png", dpi=dpi, metadata={"Software": None})
    return buf.getvalue()


def intercept_histogram(intercepts_um, *, mean_intercept_um: float | None, ci95=None,
                        pixel_size_um: float | None = None, title: str = ""):
    """Histogram of grain chord lengths on the test lines, with the mean lineal intercept.

    Chords are whole numbers of pixels, so with ``pixel_size_um`` the bins are whole
    numbers of pixels wide, centred on the possible lengths (no aliasing between bins).
    """
    fig = _figure(5.2, 3.2)
    ax = fig.add_subplot(1, 1, 1)
    x = np.asarray(intercepts_um, float)
    if x.size:
        top = float(np.percentile(x, 99.5))
        if pixel_size_um:
            step = max(1, int(np.ceil(top / 30 / pixel_size_um))) * pixel_size_um
            bins = np.arange(0.5 * pixel_size_um, top + step, step)
        else:
            bins = np.linspace(0, top, 31)
        ax.hist(np.clip(x, 0, top), bins=bins, color=PALETTE["grain"], alpha=0.85,
                edgecolor="white", linewidth=0.5)
    if mean_intercept_um:
        if ci95 and None not in ci95:
            ax.axvspan(ci95[0], ci95[1], color=PALETTE["band"], zorder=0,
                       label="95 % CI of the mean")
        ax.axvline(mean_intercept_um, color=INK, linewidth=1.4,
                   label=f"mean lineal intercept {mean_intercept_um:.3g} µm")
        ax.legend(fontsize=7, frameon=False)
    ax.set_xlabel("chord length on horizontal and vertical test lines (µm)", fontsize=8)
    ax.set_ylabel("chords", fontsize=8)
    ax.set_title(title or "Intercept lengths", fontsize=9, color=INK)
    _style(ax)
    fig.tight_layout()
    return fig


def particle_size_histogram(ecd_um, weights, *, summary: dict, title: str = ""):
    """Edge-weighted histogram of particle section diameters (log bins), with D50 and the
    unfolded mean sphere diameter."""
    fig = _figure(5.2, 3.2)
    ax = fig.add_subplot(1, 1, 1)
    x = np.asarray(ecd_um, float)
    w = np.asarray(weights, float)
    if x.size:
        lo, hi = float(x.min()), float(x.max())
        edges = np.geomspace(max(lo * 0.9, 1e-6), hi * 1.1, 26)
        ax.hist(x, bins=edges, weights=w, color=PALETTE["particle"], alpha=0.85,
                edgecolor="white", linewidth=0.5)
        ax.set_xscale("log")
        from matplotlib.ticker import FormatStrFormatter, LogLocator, NullFormatter

        ax.xaxis.set_major_locator(LogLocator(base=10, subs=(1.0, 2.0, 5.0)))
        ax.xaxis.set_major_formatter(FormatStrFormatter("%g"))
        ax.xaxis.set_minor_formatter(NullFormatter())
    d50 = summary.get("d50_um")
    if d50:
        ax.axvline(d50, color=INK, linewidth=1.2, label=f"D50 (sections) {d50:.3g} µm")
    msd = summary.get("mean_sphere_diameter_um")
    if msd:
        ax.axvline(msd, color=PALETTE["yield"], linewidth=1.2, linestyle="--",
                   label=f"mean sphere diameter {msd:.3g} µm")
    if d50 or msd:
        ax.legend(fontsize=7, frameon=False)
    ax.set_xlabel("equivalent circle diameter of sections (µm, log scale)", fontsize=8)
    ax.set_ylabel("particles (edge-weighted)", fontsize=8)
    ax.set_title(title or "Particle section sizes", fontsize=9, color=INK)
    _style(ax)
    fig.tight_layout()
    return fig


_LABELS = {"sigma0": "σ0 (friction)", "hall_petch": "Hall–Petch", "orowan": "Orowan",
           "solid_solution": "solid solution", "friction": "friction",
           "dislocations": "dislocations", "taylor": "dislocations"}


_SHARE_LABELS = {
    "sigma0_mpa": "σ0 (material constant)", "k_mpa_sqrt_m": "Hall–Petch k (constant)",
    "mean_intercept_um": "grain size (measured)", "area_fraction": "area fraction (measured)",
    "mean_section_diameter_nm": "particle size (measured)",
    "sections_per_nm2": "particle count per area (measured)",
    "shear_modulus_gpa": "shear modulus G (constant)", "burgers_nm": "Burgers vector",
    "taylor_factor": "Taylor factor M", "poisson_ratio": "Poisson ratio",
    "friction_mpa": "friction stress", "solid_solution_mpa": "solid solution stress",
    "dislocation_density_per_m2": "dislocation density",
}


def strength_figure(strength: dict, *, title: str = ""):
    """Two panels: each contribution (median, 95 % interval) and the total; the share of
    the total's variance that each uncertain input carries."""
    fig = _figure(7.6, 2.9)
    ax1, ax2 = fig.subplots(1, 2, gridspec_kw={"width_ratios": [1.25, 1]})
    rows = [(k, v) for k, v in strength["contributions_mpa"].items()
            if isinstance(v, dict) and "median" in v]
    rows.append(("total", strength["yield_mpa"]))
    for i, (k, v) in enumerate(rows):
        lo, hi = v["ci95"]
        colour = PALETTE["yield"] if k == "total" else PALETTE["muted"]
        ax1.barh(i, v["median"], color=colour, alpha=0.35 if k != "total" else 0.6, height=0.6)
        ax1.errorbar(v["median"], i, xerr=[[v["median"] - lo], [hi - v["median"]]], fmt="o",
                     color=colour, ms=4, capsize=3, lw=1.2)
        ax1.text(hi, i, f"  {v['median']:.0f} [{lo:.0f}, {hi:.0f}]", va="center", fontsize=7,
                 color=INK)
    ax1.set_yticks(range(len(rows)), [_LABELS.get(k, k.replace("_", " "))
                                      for k, _ in rows], fontsize=8)
    ax1.invert_yaxis()
    ax1.set_xlabel("MPa (median and 95 % interval)", fontsize=8)
    ax1.set_title(title or "Yield estimate by contribution", fontsize=9, color=INK)
    xmax = max(v["ci95"][1] for _, v in rows)
    ax1.set_xlim(0, xmax * 1.45)
    _style(ax1)
    var = strength.get("variance_share", {})
    shares = sorted(((_SHARE_LABELS.get(k, k), float(v)) for k, v in var.items()
                     if v is not None and v > 0.005), key=lambda kv: -kv[1])
    if shares:
        names = [k.replace("_", " ") for k, _ in shares]  # unknown names shown plainly
        ax2.barh(range(len(shares)), [100 * v for _, v in shares], color=PALETTE["grain"],
                 height=0.6)
        ax2.set_yticks(range(len(shares)), names, fontsize=7)
        ax2.invert_yaxis()
        for i, (_, share) in enumerate(shares):
            ax2.text(100 * share, i, f" {100 * share:.0f} %", va="center", fontsize=7,
                     color=INK)
        ax2.set_xlim(0, 115)
    ax2.set_xlabel("share of the variance of the total (%)", fontsize=8)
    ax2.set_title("Sources of uncertainty", fontsize=9, color=INK)
    _style(ax2)
    fig.tight_layout()
    return fig


def _err(points, key, ci_key, scale=1.0):
    xs, ys, lo, hi = [], [], [], []
    for p in points:
        v = p.get(key)
        if v is None:
            continue
        ci = p.get(ci_key) or [None, None]
        xs.append(p["value"])
        ys.append(v * scale)
        lo.append(v * scale - ci[0] * scale if ci[0] is not None else 0.0)
        hi.append(ci[1] * scale - v * scale if ci[1] is not None else 0.0)
    return np.asarray(xs), np.asarray(ys), np.asarray([lo, hi])


def _power_law_curve(ax, t_max: float, initial: float, rate: float, power: int, label: str):
    """Draw size(t) = (initial + rate·t)^(1/power), the fitted kinetic law of a series."""
    t = np.linspace(0, t_max * 1.05, 100)
    v = initial + rate * t
    ok = v > 0
    ax.plot(t[ok], v[ok] ** (1.0 / power), color=PALETTE["fit"], lw=1.2, label=label)
    ax.legend(fontsize=7, frameon=False)


def trend_figure(trend: dict):
    """Grain size, particle size and predicted yield against the trial variable (error bars
    are the 95 % intervals), with the coarsening / growth law drawn when it was fitted."""
    pts = trend["points"]
    panels = []
    if any(p["mean_intercept_um"] is not None for p in pts):
        panels.append("grain")
    if any(p["mean_sphere_diameter_um"] is not None for p in pts):
        panels.append("particle")
    if any(p["yield_median_mpa"] is not None for p in pts):
        panels.append("yield")
    fig = _figure(3.3 * max(1, len(panels)), 3.1)
    axes = fig.subplots(1, max(1, len(panels)), squeeze=False)[0]
    xlabel = f"{trend['variable']} ({trend['unit']})" if trend["unit"] else trend["variable"]
    for ax, kind in zip(axes, panels, strict=False):
        if kind == "grain":
            x, y, e = _err(pts, "mean_intercept_um", "mean_intercept_ci95_um")
            ax.errorbar(x, y, yerr=e, fmt="o", color=PALETTE["grain"], capsize=4, ms=5)
            ax.set_ylabel("mean lineal intercept (µm)", fontsize=8)
            ax.set_title("Grain size", fontsize=9, color=INK)
            gg = trend.get("grain_growth")
            if gg:
                _power_law_curve(ax, x.max(), gg["initial_size_squared_um2"],
                                 gg["rate_um2_per_unit"], 2, "d² − d0² = k·t")
        elif kind == "particle":
            x, y, e = _err(pts, "mean_sphere_diameter_um", "mean_sphere_diameter_ci95_um",
                           scale=500.0)
            ax.errorbar(x, y, yerr=e, fmt="s", color=PALETTE["particle"], capsize=4, ms=5)
            ax.set_ylabel("mean particle radius (nm)", fontsize=8)
            ax.set_title("Particle size (unfolded spheres)", fontsize=9, color=INK)
            co = trend.get("coarsening")
            if co:
                _power_law_curve(ax, x.max(), co["initial_radius_cubed_nm3"],
                                 co["rate_nm3_per_unit"], 3, "LSW r³ − r0³ = K·t")
        else:
            x, y, e = _err(pts, "yield_median_mpa", "yield_ci95_mpa")
            ax.errorbar(x, y, yerr=e, fmt="D", color=PALETTE["yield"], capsize=4, ms=5)
            ax.set_ylabel("predicted yield (MPa)", fontsize=8)
            ax.set_title("Yield estimate (model, not a test)", fontsize=9, color=INK)
        ax.set_xlabel(xlabel, fontsize=8)
        ax.set_xticks(sorted({p["value"] for p in pts}))
        ax.set_ylim(bottom=0)
        _style(ax)
    fig.suptitle(f"Series {trend['series']}", fontsize=10, color=INK)
    fig.tight_layout()
    return fig
