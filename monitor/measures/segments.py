"""Districts of many units held as flat arrays grouped by unit, with segment reductions.

Every measure in this package takes a :class:`Segments` (or the raw arrays it is built from) and
returns one value per unit, computed for all units at once with ``np.bincount`` / ``lexsort``
reductions; there is no Python loop over units.

Conventions fixed here, for every measure (see ``notes/contracts.md``):

* ``share`` x_i = a_i / (a_i + b_i), party a's two-party share of district i;
* ``seat`` s_i = 1 if a_i > b_i, 0 if a_i < b_i, 1/2 on an exact tie (compared on the vote
  counts, not on the rounded share);
* a unit is *defined* when it has at least one district and every district has two-party votes
  (a district with a_i = b_i = 0 has no share and no winner, so every measure of its unit is
  NaN rather than a silent number).
"""

from __future__ import annotations

from functools import cached_property

import numpy as np

#: Half-width of the tie zone of :func:`step`.  Uniform-swing thresholds such as
#: ``x_i - V + v - 1/2`` are computed in floating point; an exact rational tie (for instance a
#: district whose share equals the statewide share) then comes out as +-1e-16 instead of 0.
#: With integer votes a genuine (non-tie) gap is at least 1 / (2 * N_votes * n_i): 5e-14 for
#: 10 million votes cast in districts of a million, above this tolerance; rounding errors
#: (< 1e-15) lie far below it.
TIE_TOL = 1e-14


def step(diff: np.ndarray) -> np.ndarray:
    """Seat indicator of a signed threshold distance: 1 above, 0 below, 1/2 within ``TIE_TOL``."""
    diff = np.asarray(diff, dtype=np.float64)
    return (diff > TIE_TOL) + 0.5 * (np.abs(diff) <= TIE_TOL)


def _validate(unit, votes_a, votes_b, n_units) -> tuple[np.ndarray, np.ndarray, np.ndarray, int]:
    """Arrays as int64 / float64 after checking them; every problem is reported at once."""
    problems = []
    unit = np.asarray(unit)
    votes_a = np.asarray(votes_a, dtype=np.float64)
    votes_b = np.asarray(votes_b, dtype=np.float64)
    if isinstance(n_units, (bool, np.bool_)) or not isinstance(n_units, (int, np.integer)):
        problems.append(f"n_units must be an integer, got {n_units!r}")
        n_units = 0
    elif n_units < 0:
        problems.append(f"n_units must be >= 0, got {n_units}")
    if unit.ndim != 1 or votes_a.ndim != 1 or votes_b.ndim != 1:
        problems.append("unit, votes_a and votes_b must be one-dimensional")
    elif not (unit.shape == votes_a.shape == votes_b.shape):
        problems.append(
            f"unit, votes_a and votes_b differ in length ({unit.size}, {votes_a.size}, {votes_b.size})"
        )
    if unit.size and not np.issubdtype(unit.dtype, np.integer):
        problems.append(f"unit must hold integers, got dtype {unit.dtype}")
    elif unit.ndim == 1 and unit.size:
        if np.any(np.diff(unit) < 0):
            problems.append("unit must be non-decreasing (rows sorted by unit)")
        if unit.min() < 0 or unit.max() >= n_units:
            problems.append(f"unit ids must lie in 0..n_units-1 = 0..{n_units - 1}")
    for name, v in (("votes_a", votes_a), ("votes_b", votes_b)):
        if not np.all(np.isfinite(v)):
            problems.append(f"{name} must be finite (no NaN or inf)")
        elif np.any(v < 0):
            problems.append(f"{name} must be >= 0")
    if problems:
        raise ValueError("invalid measures input: " + "; ".join(problems))
    return unit.astype(np.int64, copy=False), votes_a, votes_b, int(n_units)


class Segments:
    """The districts of ``n_units`` units, flattened and sorted by unit.

    Parameters
    ----------
    unit : array_like of int, shape (M,)
        Unit id of each district row, non-decreasing, in ``0..n_units-1``.  Units without rows
        are allowed (their measures are NaN).
    votes_a, votes_b : array_like of float, shape (M,)
        Two-party votes of parties a and b (finite, >= 0).  Unvalidated, they may also have shape
        (K, M): K elections on the same districts (the interval simulation), and every per-unit
        result then has shape (K, n_units).  The measures built from ``sum``, ``spread``,
        ``divide`` and ``mask`` (efficiency gap, declination, uniform swing) work on both.
    n_units : int
    validate : bool, default True
        Check the arrays (:class:`ValueError` listing every problem).  Internal callers that
        build already-valid arrays (the interval simulation) switch it off.

    Examples
    --------
    >>> seg = Segments([0, 0, 1], [60.0, 30.0, 50.0], [40.0, 70.0, 50.0], 2)
    >>> seg.count.tolist(), seg.seat.tolist(), seg.sum(seg.seat).tolist()
    ([2, 1], [1.0, 0.0, 0.5], [1.0, 0.5])
    """

    def __init__(self, unit, votes_a, votes_b, n_units: int, *, validate: bool = True):
        if validate:
            unit, votes_a, votes_b, n_units = _validate(unit, votes_a, votes_b, n_units)
        self.unit = unit
        self.votes_a = votes_a
        self.votes_b = votes_b
        self.n_units = n_units

    #: The per-district values :meth:`take` carries over: each an elementwise function of one
    #: district's votes, so a gathered value equals the one computed on the gathered votes.
    PER_DISTRICT = ("total", "share", "share_b", "margin", "seat")

    @classmethod
    def take(cls, source: "Segments", rows: np.ndarray, unit: np.ndarray, n_units: int,
             count: np.ndarray | None = None) -> "Segments":
        """The districts ``rows`` of ``source`` (repeats allowed), grouped into ``n_units`` units by
        ``unit`` (non-decreasing, one id per row; not checked); ``count``, when the caller knows
        it, is the number of rows of each unit (int64, not checked either).

        The per-district values ``source`` has already computed (:attr:`PER_DISTRICT`) are gathered
        instead of computed again, and when ``source`` has no district without votes neither has
        any unit: the measures of many units drawn from one set of districts (the simulated
        delegations of :mod:`monitor.pool`) read each district's share and seat once, value for
        value the same as from ``Segments(unit, votes_a[rows], votes_b[rows], n_units)``.

        Examples
        --------
        >>> src = Segments([0, 0, 0], [60.0, 30.0, 50.0], [40.0, 70.0, 50.0], 1)
        >>> src.share.tolist()
        [0.6, 0.3, 0.5]
        >>> seg = Segments.take(src, np.array([2, 0, 0, 1]), np.array([0, 0, 1, 1]), 2)
        >>> seg.share.tolist(), seg.seats_a.tolist()
        ([0.5, 0.6, 0.6, 0.3], [1.5, 1.0])
        """
        seg = cls(unit, source.votes_a[rows], source.votes_b[rows], n_units, validate=False)
        for name in cls.PER_DISTRICT:
            if name in source.__dict__:  # computed (cached) on the source
                seg.__dict__[name] = source.__dict__[name][rows]
        if not source.has_empty_district.any():
            seg.__dict__["has_empty_district"] = np.zeros(n_units, dtype=bool)
        if count is not None:
            seg.__dict__["count"] = count
        return seg

    # -- per district ---------------------------------------------------------------------
    @cached_property
    def total(self) -> np.ndarray:
        """n_i = a_i + b_i."""
        return self.votes_a + self.votes_b

    def _ratio(self, num: np.ndarray) -> np.ndarray:
        out = np.full(num.shape, np.nan)
        np.divide(num, self.total, out=out, where=self.total > 0)
        return out

    @cached_property
    def share(self) -> np.ndarray:
        """x_i = a_i / n_i (NaN where n_i = 0)."""
        return self._ratio(self.votes_a)

    @cached_property
    def share_b(self) -> np.ndarray:
        """b_i / n_i, party b's share, computed from b's votes (so swapping parties is exact)."""
        return self._ratio(self.votes_b)

    @cached_property
    def margin(self) -> np.ndarray:
        """|a_i - b_i| / n_i = |2 x_i - 1|, the two-party margin (symmetric in the parties)."""
        return self._ratio(np.abs(self.votes_a - self.votes_b))

    @cached_property
    def seat(self) -> np.ndarray:
        """s_i: 1 if a_i > b_i, 0 if a_i < b_i, 1/2 on an exact tie."""
        return 0.5 + 0.5 * np.sign(self.votes_a - self.votes_b)

    # -- per unit -------------------------------------------------------------------------
    def sum(self, values: np.ndarray) -> np.ndarray:
        """Per-unit sum of a per-district array (0 for empty units).

        Rows are contiguous per unit, so one ``np.add.reduceat`` over the non-empty units' starts
        does it (about 4x faster than a weighted ``np.bincount``)."""
        values = np.asarray(values, dtype=np.float64)
        out = np.zeros((*values.shape[:-1], self.n_units))
        if not self._filled.size:
            return out
        starts = self.starts[self._filled]
        if values.ndim == 2:  # K elections: one flat reduceat (numpy's axis=-1 path is slower)
            k, m = values.shape
            starts = (np.arange(k)[:, None] * m + starts).ravel()
            out[:, self._filled] = np.add.reduceat(values.ravel(), starts).reshape(k, -1)
        else:
            out[self._filled] = np.add.reduceat(values, starts)
        return out

    def spread(self, per_unit: np.ndarray) -> np.ndarray:
        """A per-unit array repeated onto the unit's district rows (rows are grouped by unit)."""
        return np.repeat(np.asarray(per_unit), self.count, axis=-1)

    @cached_property
    def count(self) -> np.ndarray:
        """N, the number of districts of each unit (int64)."""
        return np.bincount(self.unit, minlength=self.n_units).astype(np.int64)

    @cached_property
    def _filled(self) -> np.ndarray:
        """Indices of the units that have at least one district row."""
        return np.flatnonzero(self.count)

    @cached_property
    def starts(self) -> np.ndarray:
        """Row index of each unit's first district (= the next unit's start when empty)."""
        return np.cumsum(self.count) - self.count

    @cached_property
    def has_empty_district(self) -> np.ndarray:
        """Per unit: some district has a_i = b_i = 0."""
        return self.sum(self.total <= 0) > 0

    @cached_property
    def total_votes(self) -> np.ndarray:
        """sum n_i per unit."""
        return self.sum(self.total)

    @cached_property
    def defined(self) -> np.ndarray:
        """Per unit: at least one district and every district has two-party votes."""
        return (self.count > 0) & ~self.has_empty_district

    def mask(self, values: np.ndarray) -> np.ndarray:
        """``values`` where the unit is defined, NaN elsewhere."""
        return np.where(self.defined, values, np.nan)

    def divide(self, num: np.ndarray, den: np.ndarray) -> np.ndarray:
        """num / den with NaN where den == 0 (no warnings)."""
        out = np.full(np.broadcast_shapes(np.shape(num), np.shape(den)), np.nan)
        np.divide(num, den, out=out, where=den != 0)
        return out

    @cached_property
    def votes_share(self) -> np.ndarray:
        """V = sum a_i / sum n_i, the statewide vote-weighted share of a (NaN without votes)."""
        return self.divide(self.sum(self.votes_a), self.total_votes)

    @cached_property
    def seats_a(self) -> np.ndarray:
        """Seats of a per unit, ties counting 1/2 (float, not masked)."""
        return self.sum(self.seat)

    @cached_property
    def sorted_share(self) -> np.ndarray:
        """District shares sorted ascending within each unit (units stay in order); NaN last.

        When every unit has the same number of districts (the simulated delegations of one unit
        do) the rows of a (units, N) matrix are sorted: the same values, several times faster
        than the general two-key sort."""
        n = self.count
        if self.unit.size and n.min() == n.max():
            return np.sort(self.share.reshape(self.n_units, -1), axis=1).ravel()
        order = np.lexsort((self.share, self.unit))
        return self.share[order]

    def median_share(self) -> np.ndarray:
        """Per-unit median of x_i (mean of the two middle values for even N; NaN if empty)."""
        n = self.count
        last = max(self.unit.size - 1, 0)
        lo = np.minimum(self.starts + np.maximum(n - 1, 0) // 2, last)
        hi = np.minimum(self.starts + n // 2, last)
        xs = self.sorted_share
        if xs.size == 0:
            return np.full(self.n_units, np.nan)
        med = (xs[lo] + xs[hi]) / 2.0
        return np.where(n > 0, med, np.nan)

    def group_stats(self, values: np.ndarray, member: np.ndarray):
        """Per-unit count, mean and sample SD (ddof=1) of ``values`` over the rows in ``member``.

        Corrected two-pass algorithm: ``ss = sum d^2 - (sum d)^2 / n`` with d the deviations
        from the rounded mean.  For a constant sample every d is the same small multiple of
        one ulp, so both terms are exact and the SD is exactly 0 (a constant sample is
        recognised as such, not given a variance of 1e-33).  Mean is NaN for an empty group,
        SD NaN for fewer than two members.
        """
        n = self.sum(member.astype(np.float64))
        mean = self.divide(self.sum(np.where(member, values, 0.0)), n)
        dev = np.where(member, values - self.spread(mean), 0.0)
        ss = self.sum(dev**2) - self.divide(self.sum(dev) ** 2, n)
        var = self.divide(np.maximum(ss, 0.0), n - 1.0)
        return n, mean, np.sqrt(var)
