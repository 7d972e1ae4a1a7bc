r"""Declination (Warrington 2018), with the sign flipped so that positive favours party a.

Published form.  Sort the N district shares of a; let k be the number a lost, with mean share
ybar, and k' = N - k the number a won, with mean share zbar.  The lost districts' centre of mass
(k/2N, ybar), the pivot on the 50 % line (k/N, 1/2) and the won districts' centre
(k/N + k'/2N, zbar) define two angles

.. math:: \theta_P = \arctan\frac{(1 - 2\bar y) N}{k}, \qquad
          \theta_Q = \arctan\frac{(2\bar z - 1) N}{k'}, \qquad
          \delta = \frac{2}{\pi}(\theta_Q - \theta_P) \in (-1, 1).

delta > 0 when a's wins are lopsided (packing) and its losses narrow (cracking), i.e. when a is
*disadvantaged*.  **This module returns -delta**, so that positive favours party a.

Ties (a project convention; the paper's treatment of x_i = 1/2 was not verified): a district
with a_i = b_i counts half as a loss and half as a win, i.e. k = sum (1 - s_i),
ybar = sum (1 - s_i) x_i / k, k' = sum s_i, zbar = sum s_i x_i / k'.  This keeps the measure
exactly antisymmetric in the two parties; without ties it is the published formula.

Undefined (NaN) when a party wins no seat (k = 0 or k' = 0), hence always for N = 1.

References
----------
.. [1] G. S. Warrington, "Quantifying Gerrymandering Using the Vote Distribution", Election Law
       Journal 17 (2018); preprint arXiv:1705.09393.
.. [2] G. S. Warrington, "Introduction to the declination function for gerrymanders",
       arXiv:1803.04799 (2018).
"""

from __future__ import annotations

import numpy as np

from .registry import FAVOURS_A, Flag, Measure
from .segments import Segments


def declination_of(seg: Segments) -> np.ndarray:
    """-delta per unit; see :func:`declination`."""
    won = seg.seat
    lost = 1.0 - won
    n = seg.count.astype(np.float64)
    # seats are halves, so their sums are exact in any order: k' = N - k exactly
    k_won = seg.seats_a
    k_lost = n - k_won
    zbar = seg.divide(seg.sum(won * seg.share), k_won)
    ybar = seg.divide(seg.sum(lost * seg.share), k_lost)
    # k = 0 or k' = 0 (a party without seats): the divisions give NaN, so delta is NaN
    theta_p = np.arctan(seg.divide((1.0 - 2.0 * ybar) * n, k_lost))
    theta_q = np.arctan(seg.divide((2.0 * zbar - 1.0) * n, k_won))
    delta = (2.0 / np.pi) * (theta_q - theta_p)
    return seg.mask(-delta)


def declination(unit, votes_a, votes_b, n_units: int) -> np.ndarray:
    """Declination of each unit, sign flipped: positive favours party a.

    See the module docstring for the formula, the tie convention and the sign.  NaN when a
    party wins no seat, when the unit is empty, or when a district has no two-party votes.

    Examples
    --------
    Shares (0.3, 0.3, 0.7): a loses two districts at 30 % and wins one at 70 %; the published
    delta is 0.2137 (a disadvantaged), so the value here is -0.2137:

    >>> x = [0.3, 0.3, 0.7]
    >>> round(float(declination([0] * 3, [100 * v for v in x], [100 * (1 - v) for v in x], 1)[0]), 10)
    -0.2136741375
    """
    return declination_of(Segments(unit, votes_a, votes_b, n_units))


DECLARED = (
    Measure(
        name="declination", order=140, label="Declination", signed=True, headline=True, table=True,
        plain="Looks at the districts each party won as two groups and compares the angle from the "
              "50% line to the middle of each group. A kink at 50% suggests one side's wins were arranged "
              "to be narrow and the other's to be lopsided.",
        formula="-(2/pi) [arctan((2 zbar - 1) N / k') - arctan((1 - 2 ybar) N / k)], k / ybar: seats a lost "
                "and their mean share, k' / zbar: seats a won and theirs; a tie counts 1/2 to each side",
        sign=FAVOURS_A + " (the negated published delta)", source="Warrington, ELJ 17 (2018), arXiv:1705.09393",
        summary="angle between the parties' won and lost districts",
        compute=lambda u: declination_of(u.seg),
        undefined=lambda u: u.asymmetry + [(u.seg.seats_a == 0, "party a won no seat"),
                                           (u.seg.seats_a == u.n, "party b won no seat")],
        interval=lambda seg, settings: declination_of(seg), null=declination, null_of=declination_of,
        flag=Flag("declination", null=True, short="declination"),
    ),
)
