"""Expected seats and null distributions from the national pool of districts.

A unit (cycle, state, chamber) with ``N`` districts and statewide vote-weighted two-party share
``V`` is compared with *simulated delegations*: ``N`` districts drawn with replacement from the same
cycle's and chamber's districts nationwide (the state's own districts left out by default), kept
only when the delegation's statewide share lies within ``tol`` of ``V``.  The idea of judging a
state's seats against delegations assembled from real districts nationwide with the same statewide
vote is Wang's [1]_; the sampler below is ours.

The target distribution, for one unit, is that of ``J = (j_1, ..., j_N)``, i.i.d. uniform over the
``M`` eligible pool districts, conditioned on the event

    A = { |sum_i a_{j_i} / sum_i n_{j_i} - V| <= tol },        n_j = a_j + b_j,

that is, on the delegation's *vote-weighted* share (votes pooled, not district shares averaged).

The package, one module per step:

=============  ===============================================================================
``pool``       :class:`NationalPool`: the districts of one cycle and chamber nationwide
``sampler``    :func:`simulate_delegations`: weighted simulated delegations (exponential tilting,
               the last district within reach)
``proposal``   the sampler's proposals: tilt, guide-table draws, the last district, the weights
``seats``      :func:`expected_seats`: expected seats, their interval and the actual seats' percentile
``nulls``      :func:`null_distributions`: each measure's percentile within its null, and
               :func:`compare_with_pool`, both for many units in memory-bounded batches
``context``    :func:`cross_state_percentile` and :func:`robust_z`: a value among the other states'
=============  ===============================================================================

Seats follow the project rule: a district is won by ``a`` when ``a_j > b_j``, by ``b`` when
``a_j < b_j``, and counts 1/2 on an exact tie.  Every signed output is positive when it favours
party ``a``.

Percentiles are fractions in [0, 1] (not 0-100) and use the mid-rank rule
``P(X < x) + 1/2 P(X = x)``.

Examples
--------
A state of two districts at 50 % that won both seats, against a pool whose 50 % delegations all
split the seats:

>>> from monitor.measures import seats_a
>>> p = national_pool([60, 40, 55, 45], [40, 60, 45, 55], ["X", "X", "Y", "Y"])
>>> got, nulls = compare_with_pool(p, ["Z"], [2], [0.5], [2.0], {"seats": [2.0]}, rng=0, accepted=400,
...                                measures={"seats": seats_a})
>>> [round(float(x[0]), 9) for x in (got.expected_seats, got.excess_seats, nulls["seats"].percentile)]
[1.0, 1.0, 1.0]

References
----------
.. [1] S. S.-H. Wang, "Three Tests for Practical Evaluation of Partisan Gerrymandering",
       Stanford Law Review 68:1263 (2016), the section on national districting patterns.
"""

from .context import cross_state_percentile, robust_z
from .nulls import NULL_MEASURES, NullResult, compare_with_pool, null_distributions
from .pool import NationalPool, national_pool
from .sampler import Delegations, simulate_delegations
from .seats import SeatsResult, expected_seats

__all__ = [
    "NationalPool",
    "Delegations",
    "SeatsResult",
    "NullResult",
    "national_pool",
    "simulate_delegations",
    "expected_seats",
    "null_distributions",
    "compare_with_pool",
    "cross_state_percentile",
    "robust_z",
    "NULL_MEASURES",
]
