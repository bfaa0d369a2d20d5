"""Figure of a Hall–Petch fit: σ against d^(−½) with the 95 % confidence and prediction bands.

matplotlib is imported lazily with the Agg backend; the function returns the Figure and the
caller saves it (no file I/O here).
"""

from __future__ import annotations

import numpy as np

from .fit import HallPetchFit


def hall_petch_figure(fit: HallPetchFit, *, title: str | None = None):
    """Plot measured σ_y against d^(−½) (mm^(−½)) with the fitted line and both 95 % bands.

    Parameters
    ----------
    fit : HallPetchFit
    title : str, optional

    Returns
    -------
    matplotlib.figure.Figure
    """
    import matplotlib

    matplotlib.use("Agg")
    from matplotlib.figure import Figure

    x_m = fit.x
    to_mm = 1.0 / np.sqrt(1e3)  # m^(-1/2) -> mm^(-1/2)
    span = np.ptp(x_m)
    grid = np.linspace(max(x_m.min() - 0.1 * span, 0.0), x_m.max() + 0.1 * span, 200)
    line = fit.sigma0_mpa + fit.k_mpa_sqrt_m * grid
    conf, pred = fit.bands_mpa(grid)
    fig = Figure(figsize=(6.0, 4.2), dpi=120)
    ax = fig.add_subplot(1, 1, 1)
    ax.fill_between(
        grid * to_mm, line - pred, line + pred, color="0.85", label="95 % prediction band"
    )
    ax.fill_between(
        grid * to_mm,
        line - conf,
        line + conf,
        color="tab:blue",
        alpha=0.3,
        label="95 % confidence band",
    )
    ax.plot(
        grid * to_mm,
        line,
        color="tab:blue",
        label=f"σ₀ = {fit.sigma0_mpa:.1f} MPa, k = {fit.k_mpa_sqrt_m:.3f} MPa·m^½",
    )
    xerr = None
    if fit.grain_size_sd_um is not None:
        d = np.asarray(fit.grain_size_um) * 1e-6
        xerr = 0.5 * d**-1.5 * np.asarray(fit.grain_size_sd_um) * 1e-6 * to_mm
    yerr = None if fit.yield_sd_mpa is None or fit.yield_sd_estimated else fit.yield_sd_mpa
    ax.errorbar(
        x_m * to_mm,
        fit.yield_mpa,
        xerr=xerr,
        yerr=yerr,
        fmt="o",
        color="k",
        ms=4,
        capsize=2,
        label=f"specimens (n = {fit.n})",
    )
    ax.set_xlabel(f"d^(−1/2)  (mm^(−1/2)), d = {fit.grain_size_convention.replace('_', ' ')}")
    ax.set_ylabel("yield stress  (MPa)")
    ax.set_title(title or f"Hall–Petch fit ({fit.method}), R² = {fit.r_squared:.3f}")
    ax.legend(loc="upper left", fontsize=7)
    ax.grid(True, color="0.9")
    fig.tight_layout()
    return fig
