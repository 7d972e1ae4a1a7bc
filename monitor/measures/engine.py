"""The measures engine: every measure of every unit at once, in long format.

Undefined values are never silent numbers: each null value carries a reason, and a value that
comes out non-finite without a known reason is nulled with the reason "non-finite result".
"""

from __future__ import annotations

import numpy as np
import pandas as pd

from .catalog import MEASURE_NAMES
from .declination import declination_of
from .descriptive import competitive_of, seat_share_of, seats_a_of, seats_b_of, vote_share_of
from .efficiency_gap import efficiency_gap_equal_turnout_of, efficiency_gap_of, efficiency_gap_seats_of
from .intervals import noise_intervals
from .lopsided import lopsided_of
from .mean_median import mean_median_test_of
from .segments import Segments
from .settings import MeasureSettings
from .swing import partisan_bias_of, responsiveness_of, seats_at_flipped_vote_of, symmetry_bias_of

COLUMNS = ["unit", "measure", "value", "low", "high", "p_value", "reason"]

NO_DISTRICTS = "no districts"
NO_VOTES = "a district has no votes for either major party (its two-party share is undefined)"
ALL_UNCONTESTED = "every district uncontested (the value would only reflect the uncontested policy)"
NON_FINITE = "non-finite result"


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
    """All measures of ``catalog.MEASURES`` for every unit, in long format.

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
        One row per (unit, measure), sorted by unit then in ``MEASURE_NAMES`` order, columns
        ``unit`` (int64), ``measure`` (str), ``value``, ``low``, ``high``, ``p_value``
        (float64, NaN = null) and ``reason`` (str, non-empty exactly when value is null).
        low/high: 95 % simulation interval of efficiency_gap, partisan_bias and declination.
        p_value: mean_median and mean_median_z (normal z-test), lopsided_t (t-test).

    Notes
    -----
    Rules for undefined values, in order of precedence: a unit without districts; a district
    without two-party votes (every share-based value); for the asymmetry measures (all but
    vote_share, seat_share, seats_a, seats_b, districts, uncontested, competitive) fewer than
    ``settings.min_districts`` districts, or every district uncontested; then each measure's
    own rule: mean_median needs 3 districts (it is identically 0 below), its z a non-zero
    spread; lopsided_t needs 2 outright wins per party and non-constant winners' shares;
    declination needs a seat for each party.

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
    n = seg.count
    n_unc = seg.sum(unc.astype(np.float64))

    base = [(n == 0, NO_DISTRICTS), (seg.has_empty_district, NO_VOTES)]
    asym = base + [(n < s.min_districts, f"fewer than {s.min_districts} districts"),
                   ((n > 0) & (n_unc == n), ALL_UNCONTESTED)]

    mm = mean_median_test_of(seg)
    lop = lopsided_of(seg, s.lopsided_variant)
    mm_gates = asym + [(n < 3, "identically 0 with fewer than 3 districts")]
    lop_gates = asym + [
        ((lop.wins_a < 2) & (lop.wins_b < 2), "each party won fewer than 2 seats outright"),
        (lop.wins_a < 2, "party a won fewer than 2 seats outright (the test needs 2 per party)"),
        (lop.wins_b < 2, "party b won fewer than 2 seats outright (the test needs 2 per party)"),
        (np.isnan(lop.statistic), "the winners' shares are constant in both parties (zero standard error)"),
    ]
    seats = seg.seats_a
    dec_gates = asym + [(seats == 0, "party a won no seat"), (seats == n, "party b won no seat")]

    ref = s.swing_reference
    # name -> (value, p_value, gates)
    table = {
        "vote_share": (vote_share_of(seg), None, [(n == 0, NO_DISTRICTS),
                                                  (seg.total_votes <= 0, "no two-party votes")]),
        "seat_share": (seat_share_of(seg), None, base),
        "seats_a": (seats_a_of(seg), None, base),
        "seats_b": (seats_b_of(seg), None, base),
        "districts": (n.astype(np.float64), None, []),
        "uncontested": (n_unc, None, []),
        "competitive": (competitive_of(seg, s.competitive_window), None, [(seg.has_empty_district, NO_VOTES)]),
        "efficiency_gap": (efficiency_gap_of(seg), None, asym),
        "efficiency_gap_equal_turnout": (efficiency_gap_equal_turnout_of(seg), None, asym),
        "efficiency_gap_seats": (efficiency_gap_seats_of(seg), None, asym),
        "mean_median": (mm.statistic, mm.pvalue, mm_gates),
        "mean_median_z": (mm.z, mm.pvalue, mm_gates + [(np.isnan(mm.z), "all district shares are equal (zero standard error)")]),
        "lopsided_t": (lop.statistic, lop.pvalue, lop_gates),
        "declination": (declination_of(seg), None, dec_gates),
        "partisan_bias": (partisan_bias_of(seg, ref), None, asym),
        "symmetry_bias": (symmetry_bias_of(seg, s.symmetry_band, ref), None, asym),
        "responsiveness": (responsiveness_of(seg, s.responsiveness_h, None, ref), None, asym),
        "seats_at_flipped_vote": (seats_at_flipped_vote_of(seg, ref), None, asym),
    }
    intervals = {}
    if s.interval_draws:
        intervals = noise_intervals(
            seg,
            {"efficiency_gap": efficiency_gap_of,
             "partisan_bias": lambda sim: partisan_bias_of(sim, ref),
             "declination": declination_of},
            s.noise_sd, s.interval_draws, rng, level=s.interval_level,
        )

    nan = np.full(nu, np.nan)
    parts = {c: [] for c in COLUMNS}
    for name in MEASURE_NAMES:
        value, p_value, gates = table[name]
        reason = _reasons(nu, gates)
        reason[(reason == "") & ~np.isfinite(value)] = NON_FINITE
        null = reason != ""
        value = np.where(null, np.nan, value)
        low, high = intervals.get(name, (nan, nan))
        parts["unit"].append(np.arange(nu, dtype=np.int64))
        parts["measure"].append(np.full(nu, name, dtype=object))
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
