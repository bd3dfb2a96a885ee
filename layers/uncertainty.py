"""Uncertainty: the spread of results when inputs are known only within a tolerance.

``[uncertainty]`` names case keys and their distributions
(:mod:`layers.variation`): a normal about the case's own value
(``relative_sd`` or ``sd``) or a uniform between ``low`` and ``high``.  The
samples are quasi-random: a scrambled Halton sequence (scipy.stats.qmc,
seeded, so a run is reproducible) mapped through each distribution's
inverse CDF, which covers the input space far more evenly than pseudo-random
draws of the same number.  Each sample is the case file with the sampled
values written in, read again by the one case reader, and run through the
same machinery as a sweep (:func:`layers.sweeps.run_points`: linear samples
marched together exactly).

- ``layers run`` adds the 0.05 / 0.5 / 0.95 quantiles of the surface
  temperatures and heat flows at each kept time (:func:`run_quantiles`);
- ``layers size`` adds, for each candidate thickness, the share of samples
  that passes each criterion and all of them, and the thinnest candidate
  that passes with the asked confidence (:func:`size_probabilities`).

A quantile or a probability from n samples carries a sampling error; for a
probability p it is at most about sqrt(p (1 - p) / n) (the binomial standard
error of independent draws; quasi-random points do better); ``size``
stores that bound with its result (``probability_sampling_error``).
"""

from __future__ import annotations

import math
from collections.abc import Callable
from typing import Any

import numpy as np
import xarray as xr

from layers.case import Case
from layers.errors import CaseError
from layers.sweeps import Point, run_points

#: The quantiles ``layers run`` reports.
QUANTILES = (0.05, 0.5, 0.95)
#: Run variables whose quantiles are reported.
SPREAD_VARIABLES = ("surface_temperature_inside", "surface_temperature_outside", "heat_flow_inside", "heat_flow_outside")
METHOD = "scrambled Halton sequence (scipy.stats.qmc), each input through its distribution's inverse CDF"


def sample_numbers(case: Case) -> dict[str, np.ndarray]:
    """The sampled value of each varied key, one per sample, in the key's unit."""
    from scipy.stats import norm, qmc

    spec = case.uncertainty
    if spec is None:
        raise CaseError(case.path, "uncertainty", "the case has no [uncertainty] table")
    u = qmc.Halton(d=len(spec.vary), scramble=True, seed=spec.seed).random(spec.samples)
    u = np.clip(u, 1e-12, 1.0 - 1e-12)
    out = {}
    for j, v in enumerate(spec.vary):
        if v.distribution == "normal":
            out[v.key] = v.mean + v.sd * norm.ppf(u[:, j])
        else:
            out[v.key] = v.low + (v.high - v.low) * u[:, j]
    return out


def sample_points(case: Case) -> list[Point]:
    """Each sample as a point: its settings written as the case file writes them."""
    spec = case.uncertainty
    numbers = sample_numbers(case)
    units = {v.key: v.units for v in spec.vary}
    grid = []
    for i in range(spec.samples):
        settings: dict[str, Any] = {}
        for key, values in numbers.items():
            value = float(values[i])
            settings[key] = f"{value:.15g} {units[key]}" if units[key] else value
        shown = ", ".join(f"{k} = {settings[k]}" for k in list(settings)[:3]) + (f", and {len(settings) - 3} more" if len(settings) > 3 else "")
        label = f"sample {i + 1} ({shown[:200]})"
        grid.append(Point((i,), settings, label))
    return grid


def check_samples(case: Case) -> str:
    """Read the cases of the samples that hold the lowest and the highest value
    of each varied key (where a sample falls outside what a case allows), so
    that a bad tolerance is refused before any run; returns what was checked."""
    from layers.case import read_toml, reusing_series
    from layers.sweeps import variant
    from layers.variation import with_values

    grid = sample_points(case)
    numbers = sample_numbers(case)
    chosen = sorted({int(np.argmin(v)) for v in numbers.values()} | {int(np.argmax(v)) for v in numbers.values()})
    data = read_toml(case.text, case.path)
    with reusing_series():
        for i in chosen:
            variant(case, with_values(data, grid[i].settings), grid[i], "uncertainty")
    return f"the {len(chosen)} samples with the extreme values of {len(numbers)} varied input(s) read"


def _attrs(case: Case) -> dict[str, Any]:
    spec = case.uncertainty
    described = []
    for v in spec.vary:
        unit = f" {v.units}" if v.units else ""
        if v.distribution == "normal":
            spread = " K" if v.units in ("degC", "°C") else (" delta_degF" if v.units in ("degF", "°F") else unit)
            described.append(f"{v.key}: normal, mean {v.mean:.6g}{unit}, sd {v.sd:.6g}{spread}")
        else:
            described.append(f"{v.key}: uniform {v.low:.6g} to {v.high:.6g}{unit}")
    return {
        "uncertainty_samples": spec.samples,
        "uncertainty_seed": spec.seed,
        "uncertainty_method": METHOD,
        "uncertainty_inputs": "; ".join(described),
    }


def run_quantiles(case: Case, ds: xr.Dataset, *, client: Any = None, progress: Callable[[int, int], None] | None = None) -> xr.Dataset:
    """The nominal run ``ds`` with the quantiles of its surface temperatures and
    heat flows over the samples: ``<variable>_quantile`` on (quantile, time),
    ``heat_flow_inside_mean_quantile`` on (quantile,)."""
    grid = sample_points(case)
    _, records = run_points(case, grid, client=client, progress=progress, where="uncertainty")
    q = np.array(QUANTILES)
    out = ds.assign_coords(quantile=("quantile", q, {"long_name": "quantile over the uncertainty samples", "units": "1"}))
    for name in SPREAD_VARIABLES:
        values = np.stack([np.asarray(r["fields"][name], dtype=float) for r in records])
        attrs = dict(ds[name].attrs)
        attrs["long_name"] = f"{attrs.get('long_name', name)}: quantiles over {len(records)} samples"
        out[f"{name}_quantile"] = (("quantile", "time"), np.quantile(values, q, axis=0), attrs)
    duration = case.time.n_steps * case.time.step
    if duration > 0:
        means = np.array([r["fields"]["heat_in_total"] for r in records]) / duration
        out["heat_flow_inside_mean_quantile"] = (
            ("quantile",), np.quantile(means, q),
            {"units": ds["heat_flow_inside"].attrs["units"], "long_name": f"mean heat flow through the inside surface over the run: quantiles over {len(records)} samples"},
        )
    out.attrs.update(_attrs(case))
    return out


def size_probabilities(case: Case, passes_of: Callable[[Case], dict[str, np.ndarray]], thickness: np.ndarray,
                       *, progress: Callable[[int, int], None] | None = None) -> tuple[dict[str, np.ndarray], dict[str, Any]]:
    """For each candidate thickness, the share of samples that passes each
    criterion (``passes_of(sample_case)`` gives each criterion's pass/fail per
    candidate) and all of them; and the attributes to store (the thinnest
    candidate that passes with the asked confidence, the sampling error)."""
    from layers.case import read_toml, reusing_series
    from layers.sweeps import variant
    from layers.variation import with_values

    spec = case.uncertainty
    grid = sample_points(case)
    data = read_toml(case.text, case.path)
    counts: dict[str, np.ndarray] = {}
    every = np.zeros(thickness.size)
    with reusing_series():
        for i, point in enumerate(grid):
            sample = variant(case, with_values(data, point.settings), point, "uncertainty")
            passes = passes_of(sample)
            for name, ok in passes.items():
                counts[name] = counts.get(name, np.zeros(thickness.size)) + ok
            every += np.logical_and.reduce(list(passes.values())) if passes else np.zeros(thickness.size, bool)
            if progress is not None and (i + 1) % 50 == 0:
                progress(i + 1, len(grid))
    n = len(grid)
    probabilities = {name: c / n for name, c in counts.items()}
    probabilities["all"] = every / n
    ok = probabilities["all"] >= spec.confidence
    attrs = dict(_attrs(case))
    attrs["confidence"] = spec.confidence
    attrs["recommended_thickness_at_confidence"] = float(thickness[np.argmax(ok)]) if ok.any() else math.nan
    attrs["recommended_thickness_at_confidence_units"] = "m"
    attrs["probability_sampling_error"] = (
        f"at most {0.5 / math.sqrt(n):.3g} (binomial standard error of {n} independent draws at p = 0.5; quasi-random samples do better)"
    )
    return probabilities, attrs
