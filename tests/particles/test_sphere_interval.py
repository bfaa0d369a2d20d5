"""The mean sphere diameter's interval comes from the spread between fields."""

import numpy as np
import pytest
from scipy import stats

from sectio.stereology import summarize_particle_fields, unfold_sections

OPTIONS = {"min_size_um": 0.01, "n_classes": 8, "foil_thickness_um": None}


def _record(rng, scale_um):
    # Sections of spheres of one field: diameters log-normal around ``scale_um``.
    ecd = rng.lognormal(np.log(scale_um), 0.3, 400)
    unf = unfold_sections(ecd, area_um2=100.0, n_classes=8, min_diameter_um=0.01,
                          max_diameter_um=float(ecd.max() * 1.001))
    result = {"image": f"f{scale_um}.tif", "field_area_um2": 100.0,
              "mean_sphere_diameter_um": unf.mean_sphere_diameter_um,
              "particles_counted": 400, "particle_count": 400, "flags": [],
              "subregions": {"area_fraction": [0.05, 0.06, 0.04, 0.05],
                             "particles_per_um2": [4.0, 4.2, 3.8, 4.0],
                             "mean_ecd_um": [scale_um] * 4},
              "area_fraction": 0.05, "volume_fraction": 0.05}
    return result, (ecd, np.ones_like(ecd))


def _summary(records, **kw):
    return summarize_particle_fields([r for r, _ in records], [OPTIONS] * len(records),
                                     [s for _, s in records], **kw)


def test_interval_is_field_to_field_not_a_particle_bootstrap():
    rng = np.random.default_rng(4)
    records = [_record(rng, s) for s in (0.08, 0.10, 0.13)]
    out = _summary(records, bootstrap=100, seed=1)
    per_field = [r["mean_sphere_diameter_um"] for r, _ in records]
    # Student t with n − 1 = 2 dof on the per-field values (scipy.stats.t), centred on the
    # pooled unfolding.
    half = stats.t.ppf(0.975, 2) * np.std(per_field, ddof=1) / np.sqrt(3)
    lo, hi = out["mean_sphere_diameter_ci95_um"]
    assert (hi - lo) / 2 == pytest.approx(half, rel=1e-9)
    assert out["mean_sphere_diameter_basis"].startswith("fields")
    # The particle bootstrap only sees counting noise: far narrower than the fields' spread.
    blo, bhi = out["mean_sphere_diameter_bootstrap_ci95_um"]
    assert (bhi - blo) < 0.5 * (hi - lo)


def test_single_field_falls_back_to_a_labelled_bootstrap():
    rng = np.random.default_rng(5)
    out = _summary([_record(rng, 0.1)], bootstrap=60, seed=1)
    assert "lower bound" in out["mean_sphere_diameter_basis"]
    assert out["mean_sphere_diameter_ci95_um"] == out["mean_sphere_diameter_bootstrap_ci95_um"]
