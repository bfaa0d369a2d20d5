"""Fit the shipped Hall–Petch constants of the pure metals to the published compilation and
print the leave-one-study-out check (coverage of the 95 % interval, median error).

Data: Cordero, Knight & Schuh 2016, Int. Mater. Rev. 61:495, table S1 (part), tension tests
(tests/data/hall_petch_published_points.csv). Run:

    python benchmarks/hall_petch_compilation.py
"""

from __future__ import annotations

import statistics
from pathlib import Path

from sectio.strength.compilation import fit_compilation, leave_one_study_out, read_compilation

DATA = Path(__file__).resolve().parents[1] / "tests" / "data" / "hall_petch_published_points.csv"
METALS = {"Fe": "fe-pure", "Cu": "cu-pure", "Al": "al-pure", "Ni": "ni-pure", "Ti": "ti-cp"}


def prior_log_sds(text: str) -> dict[str, float]:
    """Prior τ per metal: the median τ of the other metals with ≥ 3 studies."""
    taus = {}
    for el in METALS:
        studies = read_compilation(text, element=el)
        if len(studies) >= 3:
            taus[el] = fit_compilation(studies).log_sd
    return {
        el: statistics.median([t for e, t in taus.items() if e != el]) for el in METALS
    }


def main() -> None:
    text = DATA.read_text(encoding="utf-8")
    priors = prior_log_sds(text)
    print("metal  material   studies points  inside/points  coverage  median rel. error")
    for el, name in METALS.items():
        studies = read_compilation(text, element=el)
        rows = leave_one_study_out(studies, prior_log_sd=priors[el])
        untestable = [r.reference for r in rows if not r.testable]
        rows = [r for r in rows if r.testable]
        if not rows:
            print(f"{el:5s}  {name:9s}  {len(studies):7d}  not testable: the studies "
                  "left after holding one out span less than a factor 2 in grain size")
            continue
        n = sum(r.n_points for r in rows)
        inside = sum(r.n_inside for r in rows)
        errs = [e for r in rows for e in r.relative_errors]
        print(
            f"{el:5s}  {name:9s}  {len(studies):7d} {n:6d}  {inside:6d}/{n:<6d}  "
            f"{inside / n:8.1%}  {statistics.median(errs):8.1%}"
            + (f"  (not testable: ref {', '.join(untestable)})" if untestable else "")
        )
        for r in rows:
            d = r.to_dict()
            print(f"         ref {d['reference']:>4s}: {d['n_inside_ci95']}/{d['n_points']}, "
                  f"median error {d['median_relative_error']:.1%}")
    print("\nConstants fitted to all studies (σ0, k, τ = between-study log sd):")
    for el, name in METALS.items():
        fit = fit_compilation(read_compilation(text, element=el), prior_log_sd=priors[el])
        lo, hi = fit.grain_size_range_um
        print(
            f"{name}: sigma0 {fit.sigma0_mpa:.4g} MPa, k {fit.k_mpa_sqrt_m:.4g} MPa·m^½, "
            f"log sd {fit.log_sd:.3g} ({fit.log_sd_method}); {fit.n_studies} studies, "
            f"{fit.n_points} points, d {lo:g}–{hi:g} µm"
        )


if __name__ == "__main__":
    main()
