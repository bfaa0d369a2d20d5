"""Seeded Monte Carlo propagation of measurement and parameter uncertainty.

Each uncertain input is a normal, log-normal or (for a mean over a few fields) Student-t
variable with a central value and a scale. Normal and log-normal inputs may be correlated
(e.g. σ₀ and k of one Hall–Petch fit, whose estimates are strongly anti-correlated): their
standard normal scores are drawn jointly with the given correlation matrix (a Gaussian
copula; for normal inputs this is exactly the bivariate normal with the fit covariance).
The model maps a dict of arrays to a dict of named contributions with a ``"total"``.

Variance shares are computed one input at a time: the model is re-run with only that input
varying (same draws, the others held at their central values), and the variances are
normalised to sum to one. For a near-linear model they equal the first-order (GUM) shares
c_i²u_i²/Σc_j²u_j² (JCGM 100:2008 §5.1; JCGM 101:2008 for the Monte Carlo method).

References
----------
.. [1] JCGM 100:2008, Guide to the expression of uncertainty in measurement (GUM).
.. [2] JCGM 101:2008, Supplement 1 to the GUM — propagation of distributions using a
       Monte Carlo method.
"""

from __future__ import annotations

import warnings
from collections.abc import Callable, Mapping, Sequence
from dataclasses import dataclass

import numpy as np

from ..errors import DegenerateDataWarning, OptionError

DEFAULT_DRAWS = 20_000
_MAX_REDRAW_ROUNDS = 50


@dataclass(frozen=True)
class UncertainInput:
    """An input with central value, standard uncertainty and distribution.

    ``dof`` set -> Student-t with that many degrees of freedom scaled by ``scale``
    (a mean over few fields); ``dof`` None -> normal. ``lognormal`` -> ``value`` is the
    median and ``scale`` the standard deviation of the natural logarithm (a spread between
    studies that scales with the value). ``positive`` normal inputs are truncated at zero by
    redrawing (a grain size or a volume fraction cannot be negative).
    """

    name: str
    value: float
    scale: float
    source: str
    dof: float | None = None
    positive: bool = True
    lognormal: bool = False

    @property
    def standard_uncertainty(self) -> float:
        """First-order standard uncertainty (log-normal: median × log sd)."""
        return float(self.value * self.scale) if self.lognormal else float(self.scale)

    def to_dict(self) -> dict:
        if self.lognormal:
            dist = f"lognormal(median={self.value:g}, log_sd={self.scale:g})"
        elif self.dof is None:
            dist = "normal"
        else:
            dist = f"student_t(dof={self.dof:g})"
        return {
            "value": float(self.value),
            "standard_uncertainty": self.standard_uncertainty,
            "distribution": dist,
            "source": self.source,
        }


@dataclass(frozen=True)
class MonteCarloResult:
    """Draws of each model output, with summary helpers."""

    outputs: dict[str, np.ndarray]
    variance_share: dict[str, float]
    truncated_fraction: dict[str, float]
    invalid_fraction: float
    seed: int
    draws: int

    def summary(self, name: str) -> dict:
        """Median, 95 % interval (2.5 and 97.5 percentiles), mean and sd of one output."""
        return summarize(self.outputs[name])


def summarize(values: np.ndarray) -> dict:
    """Median, ``ci95`` (2.5/97.5 percentiles), mean and sd of finite draws."""
    v = np.asarray(values, dtype=float)
    v = v[np.isfinite(v)]
    lo, med, hi = np.percentile(v, [2.5, 50.0, 97.5])
    return {
        "median": float(med),
        "ci95": [float(lo), float(hi)],
        "mean": float(np.mean(v)),
        "sd": float(np.std(v, ddof=1)),
    }


def correlation_matrix(
    inputs: Sequence[UncertainInput], correlations: Mapping[tuple[str, str], float] | None
) -> np.ndarray:
    """Correlation matrix of ``inputs`` (identity plus the given pairs), checked."""
    names = [i.name for i in inputs]
    corr = np.eye(len(names))
    for (a, b), rho in (correlations or {}).items():
        if a not in names or b not in names or a == b:
            raise OptionError(
                f"A correlation is given between {a!r} and {b!r}, but the inputs are "
                f"{names}; name two different inputs of the model."
            )
        if not -1.0 <= float(rho) <= 1.0:
            raise OptionError(f"The correlation of {a} and {b} must lie in [-1, 1], got {rho}.")
        ia, ib = names.index(a), names.index(b)
        if inputs[ia].dof is not None or inputs[ib].dof is not None:
            raise OptionError(
                f"{a} and {b}: only normal or log-normal inputs can be correlated."
            )
        corr[ia, ib] = corr[ib, ia] = float(rho)
    if np.linalg.eigvalsh(corr).min() < -1e-9:
        raise OptionError(
            "The correlations given are not consistent (the matrix is not positive "
            "semi-definite); check the covariance."
        )
    return corr


def _correlated_scores(corr: np.ndarray, n: int, rng: np.random.Generator) -> np.ndarray:
    """(n, m) standard normal scores with correlation ``corr`` (eigen factor: ρ = ±1 works)."""
    w, v = np.linalg.eigh(corr)
    factor = v * np.sqrt(np.clip(w, 0.0, None))
    return rng.standard_normal((n, corr.shape[0])) @ factor.T


def draw_inputs(
    inputs: Sequence[UncertainInput],
    draws: int,
    rng: np.random.Generator,
    correlations: Mapping[tuple[str, str], float] | None = None,
) -> tuple[dict[str, np.ndarray], dict[str, float]]:
    """Draw every input and return draws and truncated fractions.

    Independent inputs are drawn one by one in the given order; inputs named in
    ``correlations`` are drawn jointly afterwards (rows with a non-positive value of a
    ``positive`` input are redrawn as a whole, which keeps the correlation).
    """
    joint = sorted({n for pair in (correlations or {}) for n in pair})
    joint_inputs = [i for i in inputs if i.name in joint]
    corr = correlation_matrix(joint_inputs, correlations) if joint_inputs else None
    samples: dict[str, np.ndarray] = {}
    truncated: dict[str, float] = {}
    for item in inputs:
        if item.name in joint:
            continue
        x = _standard(rng, item.dof, draws)
        values = _values(item, x)
        n_bad = 0
        if item.positive and not item.lognormal:
            bad = values <= 0
            n_bad = int(bad.sum())
            for _ in range(_MAX_REDRAW_ROUNDS):
                if not bad.any():
                    break
                values[bad] = _values(item, _standard(rng, item.dof, int(bad.sum())))
                bad = values <= 0
            if bad.any():
                raise _too_wide(item)
        samples[item.name] = values
        truncated[item.name] = n_bad / draws
    if joint_inputs:
        assert corr is not None
        z = _correlated_scores(corr, draws, rng)
        block = np.column_stack([_values(it, z[:, j]) for j, it in enumerate(joint_inputs)])
        check = [j for j, it in enumerate(joint_inputs) if it.positive and not it.lognormal]
        bad = np.asarray((block[:, check] <= 0).any(axis=1) if check
                         else np.zeros(draws, bool))
        n_bad = int(bad.sum())
        for _ in range(_MAX_REDRAW_ROUNDS):
            if not bad.any():
                break
            z = _correlated_scores(corr, int(bad.sum()), rng)
            block[bad] = np.column_stack(
                [_values(it, z[:, j]) for j, it in enumerate(joint_inputs)]
            )
            bad = np.asarray((block[:, check] <= 0).any(axis=1) if check else bad & False)
        if bad.any():
            raise _too_wide(joint_inputs[check[0]])
        for j, it in enumerate(joint_inputs):
            samples[it.name] = block[:, j]
            truncated[it.name] = n_bad / draws
    return {i.name: samples[i.name] for i in inputs}, {i.name: truncated[i.name] for i in inputs}


def _values(item: UncertainInput, x: np.ndarray) -> np.ndarray:
    if item.lognormal:
        return item.value * np.exp(item.scale * x)
    return item.value + item.scale * x


def _too_wide(item: UncertainInput) -> OptionError:
    return OptionError(
        f"The uncertainty of {item.name} ({item.scale:g}) is so large against its "
        f"value ({item.value:g}) that positive draws cannot be made; check the input."
    )


def _standard(rng: np.random.Generator, dof: float | None, n: int) -> np.ndarray:
    if dof is None:
        return rng.standard_normal(n)
    return rng.standard_t(dof, n)


def propagate(
    model: Callable[[Mapping[str, object]], dict[str, np.ndarray]],
    inputs: Sequence[UncertainInput],
    *,
    draws: int = DEFAULT_DRAWS,
    seed: int = 0,
    correlations: Mapping[tuple[str, str], float] | None = None,
) -> MonteCarloResult:
    """Propagate ``inputs`` through ``model`` by seeded Monte Carlo.

    Parameters
    ----------
    model : callable
        Maps a dict {input name: float or ndarray} to a dict of outputs (ndarrays or
        floats) that includes ``"total"``. Must be vectorised (numpy broadcasting).
    inputs : sequence of UncertainInput
        Drawn in this order from ``np.random.default_rng(seed)``.
    draws : int
        Number of draws (at least 1000).
    seed : int
        Seed of the generator; the same seed gives identical draws.
    correlations : mapping of (name, name) to float, optional
        Correlation coefficients between pairs of normal / log-normal inputs (e.g.
        ``{("sigma0_mpa", "k_mpa_sqrt_m"): -0.92}`` from a Hall–Petch fit's covariance).

    Returns
    -------
    MonteCarloResult
    """
    from .._checks import check_number

    # at least 1000 for a stable 95 % interval; at most a million (memory)
    draws = check_number(draws, what="--draws", name="draws")
    seed = check_number(seed, what="--seed", name="seed")
    rng = np.random.default_rng(seed)
    names = [i.name for i in inputs]
    if len(set(names)) != len(names):
        raise ValueError(f"duplicate Monte Carlo input names: {names}")
    samples, truncated = draw_inputs(inputs, draws, rng, correlations)
    outputs = {
        k: np.broadcast_to(np.asarray(v, float), (draws,)).copy() for k, v in model(samples).items()
    }
    total = outputs["total"]
    invalid = float(np.mean(~np.isfinite(total)))
    if invalid > 0.005:
        warnings.warn(
            f"{invalid:.1%} of the Monte Carlo draws gave no valid strength (e.g. particles "
            "overlapping in the glide plane); the interval uses the valid draws only.",
            DegenerateDataWarning,
            stacklevel=2,
        )
    central = {i.name: float(i.value) for i in inputs}
    variances: dict[str, float] = {}
    for item in inputs:
        if item.scale <= 0:
            continue
        one: dict = dict(central)
        one[item.name] = samples[item.name]
        tot = np.broadcast_to(np.asarray(model(one)["total"], float), (draws,))
        tot = tot[np.isfinite(tot)]
        variances[item.name] = float(np.var(tot)) if tot.size > 1 else 0.0
    var_total = float(np.nanvar(total))
    # Inputs the model does not depend on give round-off variance only; count them as zero.
    variances = {k: (v if v > 1e-12 * var_total else 0.0) for k, v in variances.items()}
    var_sum = sum(variances.values())
    share = {k: (v / var_sum if var_sum > 0 else 0.0) for k, v in variances.items()}
    return MonteCarloResult(outputs, share, truncated, invalid, int(seed), draws)


def first_order_sd(
    model_total: Callable[[Mapping[str, float]], float],
    inputs: Sequence[UncertainInput],
    *,
    rel_step: float = 1e-6,
    correlations: Mapping[tuple[str, str], float] | None = None,
) -> float:
    """First-order (GUM law of propagation) standard uncertainty of a scalar model.

    u² = Σᵢⱼ cᵢ cⱼ r(i, j) uᵢ uⱼ (JCGM 100:2008 eq. 13) with sensitivity coefficients cᵢ by
    central differences and the correlations r given (zero otherwise). Student-t inputs
    enter with their standard deviation scale·√(ν/(ν − 2)) (ν > 2); log-normal inputs with
    median × log sd.
    """
    central = {i.name: float(i.value) for i in inputs}
    corr = correlation_matrix(inputs, correlations)
    cu = np.zeros(len(inputs))
    for j, item in enumerate(inputs):
        if item.scale <= 0:
            continue
        h = rel_step * max(abs(item.value), 1e-12)
        up, down = dict(central), dict(central)
        up[item.name] += h
        down[item.name] -= h
        c = (float(model_total(up)) - float(model_total(down))) / (2 * h)
        sd = item.standard_uncertainty
        if item.dof is not None:
            if item.dof <= 2:
                raise OptionError("first-order propagation needs more than 2 degrees of freedom.")
            sd *= np.sqrt(item.dof / (item.dof - 2.0))
        cu[j] = c * sd
    return float(np.sqrt(max(cu @ corr @ cu, 0.0)))
