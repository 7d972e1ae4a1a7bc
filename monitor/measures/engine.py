"""The measures engine: every measure of the registry, for every unit at once, in long format.

Undefined values are never silent numbers: each null value carries a reason (the measure's
``undefined`` rules, :mod:`monitor.measures.registry`), and a value that comes out non-finite
without a known reason is nulled with the reason "non-finite result".
"""

from __future__ import annotations

import numpy as np
import pandas as pd

from .intervals import noise_intervals
from .registry import ALL_UNCONTESTED, NO_DISTRICTS, NO_VOTES, NON_FINITE, Inputs, measures
from .segments import Segments
from .settings import MeasureSettings

COLUMNS = ["unit", "measure", "value", "low", "high", "p_value", "reason"]

__all__ = ["ALL_UNCONTESTED", "COLUMNS", "NON_FINITE", "NO_DISTRICTS", "NO_VOTES", "compute_measures"]


def _reasons(n_units: int, gates) -> np.ndarray:
    """Per unit the text of the first gate whose mask is true, "" where none is."""
    reason = np.full(n_units, "", dtype=object)
    for mask, text in gates:
        reason[(reason == "") & np.asarray(mask, dtype=bool)] = text
    return reason


def compute_measures(
    unit,
    votes_a,
    votes_b,
    uncontested,
    n_units: int,
    settings: MeasureSettings,
    rng: np.random.Generator,
) -> pd.DataFrame:
    """All measures of the registry (``catalog.MEASURES``) for every unit, in long format.

    Parameters
    ----------
    unit : array_like of int64, shape (M,)
        Unit id (0..n_units-1) of each single-member contest, non-decreasing.
    votes_a, votes_b : array_like of float64, shape (M,)
        Two-party votes after the uncontested policy.
    uncontested : array_like of bool, shape (M,)
        One major party was absent before imputation.
    n_units : int
    settings : MeasureSettings
    rng : numpy.random.Generator
        Drives the interval simulation (see ``intervals``); a unit's intervals depend only on
        its own districts and the generator's state.

    Returns
    -------
    pandas.DataFrame
        One row per (unit, measure), sorted by unit then in the registry's order, columns
        ``unit`` (int64), ``measure`` (str), ``value``, ``low``, ``high``, ``p_value``
        (float64, NaN = null) and ``reason`` (str, non-empty exactly when value is null).
        low/high: the simulation interval of the measures declared with an ``interval`` function
        (efficiency_gap, partisan_bias, declination); p_value: of those whose ``compute`` gives
        one (mean_median and mean_median_z: normal z-test; lopsided_t: t-test).

    Notes
    -----
    Rules for undefined values, in order of precedence (each measure's ``undefined``): a unit
    without districts; a district without two-party votes (every share-based value); for the
    asymmetry measures fewer than ``settings.min_districts`` districts, or every district
    uncontested; then each measure's own rule: mean_median needs 3 districts (it is identically
    0 below), its z a non-zero spread; lopsided_t needs 2 outright wins per party and
    non-constant winners' shares; declination needs a seat for each party.

    Examples
    --------
    >>> import numpy as np
    >>> unit = np.array([0, 0, 0, 0, 0, 1])
    >>> a = np.array([300.0, 400.0, 450.0, 470.0, 800.0, 600.0])
    >>> frame = compute_measures(unit, a, 1000.0 - a, np.zeros(6, bool), 2,
    ...                          MeasureSettings(interval_draws=0), np.random.default_rng(0))
    >>> frame.set_index(["unit", "measure"]).loc[0].loc[["partisan_bias", "mean_median"], "value"].round(6).tolist()
    [-0.3, -0.034]
    >>> frame.set_index(["unit", "measure"]).loc[(1, "efficiency_gap"), "reason"]
    'fewer than 2 districts'
    """
    if not isinstance(settings, MeasureSettings):
        raise TypeError("settings must be a MeasureSettings")
    seg = Segments(unit, votes_a, votes_b, n_units)
    unc = np.asarray(uncontested)
    if unc.shape != seg.unit.shape or unc.dtype != np.bool_:
        raise ValueError("uncontested must be a boolean array with one value per district row")
    if settings.interval_draws and not isinstance(rng, np.random.Generator):
        raise TypeError("rng must be a numpy.random.Generator")
    s, nu = settings, seg.n_units
    inputs = Inputs(seg, unc, s)
    declared = measures()
    intervals = {}
    if s.interval_draws:
        with_interval = {m.name: (lambda sim, f=m.interval: f(sim, s)) for m in declared if m.interval is not None}
        intervals = noise_intervals(seg, with_interval, s.noise_sd, s.interval_draws, rng, level=s.interval_level)

    return _long_frame(declared, inputs, intervals, nu)


def _long_frame(declared, inputs: Inputs, intervals: dict, nu: int) -> pd.DataFrame:
    """Each declared measure's values, p-values, intervals and reasons, one row per unit and measure."""
    nan = np.full(nu, np.nan)
    parts = {c: [] for c in COLUMNS}
    for m in declared:
        out = m.compute(inputs)
        value, p_value = out if isinstance(out, tuple) else (out, None)
        reason = _reasons(nu, m.undefined(inputs))
        reason[(reason == "") & ~np.isfinite(value)] = NON_FINITE
        null = reason != ""
        value = np.where(null, np.nan, value)
        low, high = intervals.get(m.name, (nan, nan))
        parts["unit"].append(np.arange(nu, dtype=np.int64))
        parts["measure"].append(np.full(nu, m.name, dtype=object))
        parts["value"].append(value)
        parts["low"].append(np.where(null, np.nan, low))
        parts["high"].append(np.where(null, np.nan, high))
        parts["p_value"].append(nan if p_value is None else np.where(null, np.nan, p_value))
        parts["reason"].append(reason)
    cols = {c: np.concatenate(v) if v else np.array([]) for c, v in parts.items()}
    order = np.argsort(cols["unit"], kind="stable")
    frame = pd.DataFrame({c: cols[c][order] for c in COLUMNS})
    frame["unit"] = frame["unit"].astype(np.int64)
    for c in ("measure", "reason"):
        frame[c] = frame[c].astype(str)
    return frame
