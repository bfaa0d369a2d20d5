"""Statistics of particle measurements over fields (ASTM E562 / E1245 recipe).

Each quantity gets mean, s, standard error, 95 % CI by Student t, % relative accuracy and
the number of fields for 10 % (via :mod:`._fieldstats`). With a single field the spread is
taken from sub-regions of that field (tiles), the interval centred on the field's own
value and labelled ``"sub-regions of one field"`` — tiles of one field are not independent
fields, so that interval is a lower bound on the field-to-field spread.

The sphere-size estimate is pooled: the edge-weighted section diameters of all fields go
into one Schwartz–Saltykov unfolding. Its interval, like every other quantity's, comes from
the spread between fields: the fields' own unfoldings give s, and the interval is the
pooled value ± t(0.975, n − 1)·s/√n (``mean_sphere_diameter_basis = "fields"``). A bootstrap
over particles (resampled within each field, percentile method, Efron & Tibshirani 1993)
only measures counting noise — it is kept as ``mean_sphere_diameter_bootstrap_ci95_um``
and is the interval only for a single field, where it is labelled as a lower bound.
"""

from __future__ import annotations

from collections.abc import Mapping, Sequence

import numpy as np

from ._fieldstats import FieldStats, field_statistics, stats_to_dict, t_critical
from ._sizes import SizeDistribution, size_distribution
from ._unfolding import unfold_sections

#: quantities summarised over fields (name in ParticleField.to_dict())
QUANTITIES = ("area_fraction", "volume_fraction", "point_fraction", "particles_per_um2",
              "mean_ecd_um", "mean_feret_max_um", "intercepts_per_um", "mean_free_path_um",
              "mean_nn_distance_um", "centre_spacing_um")
#: quantities available per sub-region of a single field
SUBREGION_QUANTITIES = ("area_fraction", "particles_per_um2", "mean_ecd_um")


def subregion_statistics(value, tile_values) -> FieldStats | None:
    """Statistics of one field from its sub-region values, centred on the field's value
    (labelled ``"sub-regions of one field"``; None with fewer than two tiles)."""
    x = np.asarray([v for v in tile_values if v is not None], float)
    if value is None or x.size < 2:
        return None
    sd = float(x.std(ddof=1))
    se = sd / np.sqrt(x.size)
    t = t_critical(x.size - 1)
    hw = t * se
    ra = 100 * hw / abs(value) if value else float("inf")
    return FieldStats(int(x.size), float(value), sd, se, t, (value - hw, value + hw), ra,
                      "sub-regions of one field")


def _keys(name: str, st: FieldStats) -> dict:
    d = stats_to_dict(name, st)
    if name.endswith("_per_um2"):
        # sectio.strength reads "<name>_se" / "<name>_ci95" for densities
        for stat in ("sd", "se", "ci95"):
            d.setdefault(f"{name}_{stat}", d.get(f"{name[:-8]}_{stat}_per_um2"))
    return d


def _pooled_unfolding(results, options, sections, rng, n_boot):
    area = float(sum(r["field_area_um2"] for r in results))
    floor = max([0.0, *(o["min_size_um"] for o in options)])
    k = options[-1]["n_classes"] if options else 12
    foil = options[0].get("foil_thickness_um") or 0.0
    groups = [(np.asarray(e, float), np.asarray(w, float)) for e, w in sections]
    ecd = np.concatenate([g[0] for g in groups])
    wts = np.concatenate([g[1] for g in groups])
    if ecd.size == 0:
        return None, None, None, None, None
    top = float(ecd.max() * 1.001)

    def run(e, w):
        return unfold_sections(e, area_um2=area, weights=w, n_classes=k, min_diameter_um=floor,
                               max_diameter_um=top, foil_thickness_um=foil)

    unf = run(ecd, wts)
    boot = []
    for _ in range(n_boot if ecd.size >= 30 else 0):
        parts = [rng.integers(0, len(g[0]), len(g[0])) for g in groups]
        e = np.concatenate([g[0][i] for g, i in zip(groups, parts, strict=True)])
        w = np.concatenate([g[1][i] for g, i in zip(groups, parts, strict=True)])
        m = run(e, w).mean_sphere_diameter_um
        if m is not None:
            boot.append(m)
    if len(boot) >= 20:
        b = np.asarray(boot)
        return unf, float(b.std(ddof=1)), [float(np.percentile(b, 2.5)),
                                           float(np.percentile(b, 97.5))], ecd, wts
    return unf, None, None, ecd, wts


def summarize_particle_fields(
    results: Sequence[Mapping],
    options: Sequence[Mapping],
    sections: Sequence[tuple],
    *,
    bootstrap: int = 200,
    seed: int = 0,
    sizes: SizeDistribution | None = None,
) -> dict:
    """Summary over fields of particle measurements (the ``summary`` of particles.json).

    Parameters
    ----------
    results : sequence of dict
        Per-field documents (:meth:`sectio.particles.ParticleField.to_dict`).
    options : sequence of dict
        Per-field measurement options (``min_size_um``, ``n_classes``,
        ``foil_thickness_um``), as in ``ParticleField.options``.
    sections : sequence of (ecd_um, weight)
        Per field, the equivalent circle diameters and Miles–Lantuéjoul weights of the
        whole particles (not cut by the field edge).
    bootstrap : int
        Resamples of the pooled sphere-size interval.
    seed : int
        Seed of the bootstrap.
    sizes : SizeDistribution, optional
        The size distribution of the pooled sections if the caller already has it.

    Returns
    -------
    dict
    """
    n = len(results)
    out: dict = {"n_fields": n}
    if n == 0:
        return out
    if n >= 2:
        basis = "fields"
        out["dof"] = n - 1
        for q in QUANTITIES:
            vals = [r.get(q) for r in results]
            st = field_statistics([v for v in vals if v is not None], basis=basis) \
                if sum(v is not None for v in vals) >= 2 else None
            if st is not None:
                out.update(_keys(q, st))
    else:
        f = results[0]
        basis = "sub-regions of one field"
        tiles = f["subregions"]
        n_tiles = len(tiles["area_fraction"])
        out["dof"] = n_tiles - 1
        for q in QUANTITIES:
            value = f.get(q)
            st = subregion_statistics(value, tiles[q]) if q in SUBREGION_QUANTITIES else None
            if st is not None:
                out.update(_keys(q, st))
            else:
                out[q] = value
        vf, af = f["volume_fraction"], f["area_fraction"]
        if vf != af and "area_fraction_ci95" in out:
            ratio = vf / af if af else 1.0
            out["volume_fraction_ci95"] = [v * ratio for v in out["area_fraction_ci95"]]
    out["basis"] = basis
    rng = np.random.default_rng(seed)
    unf, se, ci, ecd, wts = _pooled_unfolding(results, options, sections, rng, bootstrap)
    if unf is not None:
        value = unf.mean_sphere_diameter_um
        out["mean_sphere_diameter_um"] = value
        out["mean_sphere_diameter_bootstrap_se_um"] = se
        out["mean_sphere_diameter_bootstrap_ci95_um"] = ci
        per_field = [v for v in (r.get("mean_sphere_diameter_um") for r in results)
                     if v is not None]
        if value is not None and len(per_field) >= 2:
            st = field_statistics(per_field, basis="fields")
            hw = st.t * st.se
            out["mean_sphere_diameter_se_um"] = st.se
            out["mean_sphere_diameter_sd_um"] = st.sd
            out["mean_sphere_diameter_ci95_um"] = [max(0.0, value - hw), value + hw]
            out["mean_sphere_diameter_dof"] = len(per_field) - 1
            out["mean_sphere_diameter_basis"] = (
                f"fields: pooled unfolding ± t·s/√n, s of {len(per_field)} per-field "
                "unfoldings (Student t)")
        else:
            out["mean_sphere_diameter_se_um"] = se
            out["mean_sphere_diameter_ci95_um"] = ci
            out["mean_sphere_diameter_basis"] = (
                f"bootstrap over the particles of one field ({bootstrap} resamples): "
                "counting noise only, a lower bound on the field-to-field spread")
        out["spheres_per_um3"] = unf.number_per_um3
        out["unfolding"] = unf.to_dict()
        sd = sizes if sizes is not None else size_distribution(ecd, wts)
        out.update({"d10_um": sd.d10_um, "d50_um": sd.d50_um, "d90_um": sd.d90_um,
                    "lognormal": sd.lognormal})
    out["particles_counted"] = int(sum(r["particles_counted"] for r in results))
    out["particle_count"] = int(sum(r["particle_count"] for r in results))
    out["flags"] = [{"image": r["image"], "flag": fl} for r in results for fl in r["flags"]]
    return out
