"""Pictures of a particle measurement: the overlay PNG (the picture of
:meth:`sectio.particles.ParticleField.overlay` with micron marker and legend) and the
size-distribution figure.

Written atomically as PNG; matplotlib (Agg) is imported only when it is drawn. It is drawn
from the pooled size distribution the summary was computed from, never recomputed.
"""

from __future__ import annotations

import io
import os

import numpy as np

from ._io import atomic_write_bytes
from ._safe import plain_text_figures

__all__ = ["overlay_png_bytes", "write_size_distribution_png"]


def overlay_png_bytes(field) -> bytes:
    """Overlay of one :class:`sectio.particles.ParticleField` with micron marker and legend."""
    from pathlib import Path

    from ._overlay import overlay_png

    d = field.to_dict()
    af = d["area_fraction"]
    caption = [
        f"{Path(str(d['image'])).name}   pixel {d['pixel_size_um']:.4g} µm",
        f"area fraction {100 * af:.2f} %   {d['particles_counted']} whole particles, "
        f"{d['particles_cut_by_edge']} cut by the edge, {d['particles_split']} split",
        "cyan: counted particles  yellow: cut by the field edge  pink: split lines",
    ]
    return overlay_png(field.overlay(), d["pixel_size_um"], caption)


@plain_text_figures
def write_size_distribution_png(path: str | os.PathLike, sizes, *, area_um2: float,
                                n_fields: int, summary: dict) -> None:
    """Size-distribution figure of all fields of a specimen together.

    ``sizes`` is the pooled :class:`sectio.stereology.SizeDistribution` of the whole
    particles (edge-weighted) that the summary was computed from; ``area_um2`` the total
    field area. Panels: ECD histogram (linear bins) with the log-normal fit; ECD histogram
    on logarithmic bins; cumulative number fraction with D10/D50/D90; the Saltykov
    sphere-diameter distribution (number per µm³ per class) from ``summary["unfolding"]``.
    """
    from matplotlib.figure import Figure  # Agg canvas; pyplot is never imported

    sd = sizes
    area = area_um2 or 1.0
    fig = Figure(figsize=(11, 8), dpi=100)
    axes = fig.subplots(2, 2)
    n_txt = f"{sd.n} whole particles, {n_fields} field(s), edge-weighted"
    ax = axes[0, 0]
    if sd.n:
        widths = np.diff(sd.linear_edges_um)
        dens = sd.linear_counts / area / widths
        ax.bar(sd.linear_edges_um[:-1], dens, width=widths, align="edge",
               color="#8fb3d9", edgecolor="#2b4a6f", label="measured")
        ln = sd.lognormal
        if ln["mu_ln_um"] is not None:
            x = np.linspace(max(sd.linear_edges_um[1] * 0.05, 1e-6), sd.linear_edges_um[-1], 300)
            pdf = np.exp(-(np.log(x) - ln["mu_ln_um"]) ** 2 / (2 * ln["sigma_ln"] ** 2)) / (
                x * ln["sigma_ln"] * np.sqrt(2 * np.pi))
            ax.plot(x, pdf * sd.weight_total / area, color="#c0392b",
                    label=f"log-normal: median {ln['median_um']:.3g} µm, "
                          f"σ_ln {ln['sigma_ln']:.2f}")
        ax.legend(fontsize=8)
    ax.set_xlabel("equivalent circle diameter (µm)")
    ax.set_ylabel("particles per µm² per µm of ECD")
    ax.set_title("Section sizes, linear bins", fontsize=10)
    ax = axes[0, 1]
    if sd.n:
        ax.bar(sd.log_edges_um[:-1], sd.log_counts / area, width=np.diff(sd.log_edges_um),
               align="edge", color="#a9d18e", edgecolor="#38572a")
        ax.set_xscale("log")
        from matplotlib.ticker import FormatStrFormatter, LogLocator, NullFormatter

        ax.xaxis.set_major_locator(LogLocator(base=10, subs=(1.0, 2.0, 5.0)))
        ax.xaxis.set_major_formatter(FormatStrFormatter("%g"))
        ax.xaxis.set_minor_formatter(NullFormatter())
    ax.set_xlabel("equivalent circle diameter (µm, log scale)")
    ax.set_ylabel("particles per µm² per bin")
    ax.set_title("Section sizes, logarithmic bins (10 per decade)", fontsize=10)
    ax = axes[1, 0]
    if sd.n:
        ax.step(sd.cumulative_um, 100 * sd.cumulative_fraction, where="post", color="#2b4a6f")
        for q, v in (("D10", sd.d10_um), ("D50", sd.d50_um), ("D90", sd.d90_um)):
            ax.axvline(v, color="#7f7f7f", linestyle="--", linewidth=0.8)
            ax.text(v, 3, f" {q} = {v:.3g} µm", rotation=90, fontsize=8, va="bottom",
                    ha="right")
    ax.set_xlabel("equivalent circle diameter (µm)")
    ax.set_ylabel("cumulative number fraction (%)")
    ax.set_ylim(0, 100)
    ax.set_title("Cumulative distribution", fontsize=10)
    ax = axes[1, 1]
    unf = summary.get("unfolding")
    if unf:
        edges = np.asarray(unf["class_edges_um"])
        nv = np.asarray(unf["spheres_per_um3"])
        ax.bar(edges[:-1], nv, width=np.diff(edges), align="edge", color="#f4b183",
               edgecolor="#843c0c")
        msd = unf.get("mean_sphere_diameter_um")
        if msd:
            ax.axvline(msd, color="#843c0c", linestyle="--", linewidth=1,
                       label=f"mean sphere diameter {msd:.3g} µm")
            ax.legend(fontsize=8)
    ax.set_xlabel("sphere diameter (µm)")
    ax.set_ylabel("spheres per µm³ per class")
    ax.set_title("Schwartz–Saltykov unfolding (spheres assumed)", fontsize=10)
    fig.suptitle(f"Particle size distribution — {n_txt}", fontsize=11)
    fig.tight_layout(rect=(0, 0, 1, 0.96))
    buf = io.BytesIO()
    fig.savefig(buf, format="png", pil_kwargs={"compress_level": 1})  # fast zlib level
    atomic_write_bytes(path, buf.getvalue())
