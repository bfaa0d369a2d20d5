"""Seeded Monte Carlo propagation of measurement and parameter uncertainty.

Each uncertain input is a normal (or, for a mean over a few fields, Student-t) variable
with a central value and a scale (standard uncertainty). Inputs are drawn independently;
the model maps a dict of arrays to a dict of named contributions with a ``"total"``.

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
    (a mean over few fields); ``dof`` None -> normal. ``positive`` inputs are truncated
    at zero by redrawing (a grain size or a volume fraction cannot be negative).
    """

    name: str
    value: float
    scale: float
    source: str
    dof: float | None = None
    positive: bool = True

    def to_dict(self) -> dict:
        return {
            "value": float(self.value),
            "standard_uncertainty": float(self.scale),
            "distribution": "normal" if self.dof is None else f"student_t(dof={self.dof:g})",
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


def draw_inputs(
    inputs: Sequence[UncertainInput], draws: int, rng: np.random.Generator
) -> tuple[dict[str, np.ndarray], dict[str, float]]:
    """Draw every input (in the given order) and return draws and truncated fractions."""
    samples: dict[str, np.ndarray] = {}
    truncated: dict[str, float] = {}
    for item in inputs:
        x = _standard(rng, item.dof, draws)
        values = item.value + item.scale * x
        n_bad = 0
        if item.positive:
            bad = values <= 0
            n_bad = int(bad.sum())
            for _ in range(_MAX_REDRAW_ROUNDS):
                if not bad.any():
                    break
                values[bad] = item.value + item.scale * _standard(rng, item.dof, int(bad.sum()))
                bad = values <= 0
            if bad.any():
                raise OptionError(
                    f"The uncertainty of {item.name} ({item.scale:g}) is so large against its "
                    f"value ({item.value:g}) that positive draws cannot be made; check the input."
                )
        samples[item.name] = values
        truncated[item.name] = n_bad / draws
    return samples, truncated


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

    Returns
    -------
    MonteCarloResult
    """
    if int(draws) < 1000:
        raise OptionError(f"--draws must be at least 1000 for a stable 95 % interval, got {draws}.")
    draws = int(draws)
    rng = np.random.default_rng(seed)
    names = [i.name for i in inputs]
    if len(set(names)) != len(names):
        raise ValueError(f"duplicate Monte Carlo input names: {names}")
    samples, truncated = draw_inputs(inputs, draws, rng)
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
        one = dict(central)
        one[item.name] = samples[item.name]
        t = np.broadcast_to(np.asarray(model(one)["total"], float), (draws,))
        t = t[np.isfinite(t)]
        variances[item.name] = float(np.var(t)) if t.size > 1 else 0.0
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
) -> float:
    """First-order (GUM law of propagation) standard uncertainty of a scalar model.

    Sensitivity coefficients by central differences; Student-t inputs enter with their
    standard deviation scale·√(ν/(ν − 2)) (ν > 2). Inputs are taken as uncorrelated.
    """
    central = {i.name: float(i.value) for i in inputs}
    var = 0.0
    for item in inputs:
        if item.scale <= 0:
            continue
        h = rel_step * max(abs(item.value), 1e-12)
        up, down = dict(central), dict(central)
        up[item.name] += h
        down[item.name] -= h
        c = (float(model_total(up)) - float(model_total(down))) / (2 * h)
        sd = item.scale
        if item.dof is not None:
            if item.dof <= 2:
                raise OptionError("first-order propagation needs more than 2 degrees of freedom.")
            sd *= np.sqrt(item.dof / (item.dof - 2.0))
        var += (c * sd) ** 2
    return float(np.sqrt(var))
