r"""Declination in seats: the declination read as a number of seats, ``delta N / 2`` (Warrington
2018), sign flipped so that positive favours party a.

Warrington reads the declination ``delta`` of a plan with ``N`` districts as about ``delta N / 2``
seats: the seats that would have to change hands for the two parties' won and lost districts to
meet at 50 % on one line (from memory: the "number of seats" reading of the ELJ paper; the
methods note lists it as a variant to verify). It puts plans of different sizes on one scale, as
the seat form of the efficiency gap does. The value here is ``-delta N / 2`` with ``delta`` as in
:mod:`monitor.measures.declination` (same tie convention, same undefined cases: a party without a
seat).

References
----------
.. [1] G. S. Warrington, "Quantifying Gerrymandering Using the Vote Distribution", Election Law
       Journal 17 (2018); preprint arXiv:1705.09393 (the seat reading delta N / 2: from memory).
"""

from __future__ import annotations

import numpy as np

from .declination import declination_of
from .registry import FAVOURS_A, Measure, by_name
from .segments import Segments


def declination_seats_of(seg: Segments) -> np.ndarray:
    """-delta N / 2 per unit; see :func:`declination_seats`."""
    return declination_of(seg) * seg.count / 2.0


def declination_seats(unit, votes_a, votes_b, n_units: int) -> np.ndarray:
    """Declination in seats, ``-delta N / 2`` per unit: positive favours party a.

    NaN where the declination is (a party without a seat, an empty unit, a district without
    two-party votes).

    Examples
    --------
    Shares (0.3, 0.3, 0.7): the published delta is 0.2136741375 (a disadvantaged), so a is about a
    third of a seat short of a symmetric outcome:

    >>> x = [0.3, 0.3, 0.7]
    >>> round(float(declination_seats([0] * 3, [100 * v for v in x], [100 * (1 - v) for v in x], 1)[0]), 7)
    -0.3205112
    """
    return declination_seats_of(Segments(unit, votes_a, votes_b, n_units))


DECLARED = (
    Measure(
        name="declination_seats", order=145, label="Declination in seats", signed=True, digits=2, table=True,
        plain="The declination read as a number of seats: roughly how many seats would have to change hands "
              "for the two parties' wins and losses to look alike. It puts large and small delegations on one "
              "scale.",
        formula="-delta N / 2, delta the published declination (see declination)",
        sign=FAVOURS_A + " (the negated published delta, in seats)",
        source="Warrington, ELJ 17 (2018), arXiv:1705.09393 (seat reading from memory)",
        summary="the declination times half the number of districts: seats",
        compute=lambda u: declination_seats_of(u.seg),
        undefined=lambda u: by_name()["declination"].undefined(u),
    ),
)
