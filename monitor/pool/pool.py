"""The national pool: the districts of one cycle and chamber nationwide (after the uncontested
policy), validated once, with the per-district quantities every step reads."""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np


@dataclass(frozen=True)
class NationalPool:
    """The districts of one cycle and chamber nationwide (after the uncontested policy).

    Build it with :func:`national_pool`, which validates the arrays.

    Attributes
    ----------
    votes_a, votes_b : ndarray of float64, shape (M,)
        Two-party votes of each district.
    state : ndarray, shape (M,)
        State id of each district (any dtype comparable with ``==``), used to leave a state's own
        districts out of its simulated delegations.
    """

    votes_a: np.ndarray
    votes_b: np.ndarray
    state: np.ndarray

    @property
    def size(self) -> int:
        return int(self.votes_a.shape[0])

    @property
    def turnout(self) -> np.ndarray:
        """Two-party total ``n_j = a_j + b_j`` (always > 0)."""
        return self.votes_a + self.votes_b

    @property
    def share(self) -> np.ndarray:
        """Party a's two-party share ``x_j = a_j / n_j``."""
        return self.votes_a / self.turnout

    @property
    def seat_a(self) -> np.ndarray:
        """Seat to a of each district: 1 if ``a > b``, 0 if ``a < b``, 1/2 on an exact tie."""
        return (self.votes_a > self.votes_b) + 0.5 * (self.votes_a == self.votes_b)


def national_pool(votes_a, votes_b, state) -> NationalPool:
    """Validate and wrap the national pool of district results.

    Parameters
    ----------
    votes_a, votes_b : array_like, shape (M,)
        Finite, non-negative two-party votes; every district needs ``a + b > 0``.
    state : array_like, shape (M,)
        State id per district.

    Raises
    ------
    ValueError
        On shape mismatch, empty pool, negative/non-finite votes or a district with no votes.

    Examples
    --------
    >>> p = national_pool([60, 40, 50], [40, 60, 50], ["X", "Y", "Y"])
    >>> p.size, p.share.tolist(), p.seat_a.tolist()
    (3, [0.6, 0.4, 0.5], [1.0, 0.0, 0.5])
    >>> national_pool([10], [-1], ["X"])
    Traceback (most recent call last):
    ...
    ValueError: pool votes must be non-negative
    """
    a = np.asarray(votes_a, dtype=np.float64)
    b = np.asarray(votes_b, dtype=np.float64)
    s = np.asarray(state)
    if a.ndim != 1 or a.shape != b.shape or s.shape != a.shape:
        raise ValueError("votes_a, votes_b and state must be 1-D arrays of the same length")
    if a.size == 0:
        raise ValueError("the national pool is empty")
    if not (np.isfinite(a).all() and np.isfinite(b).all()):
        raise ValueError("pool votes must be finite")
    if (a < 0).any() or (b < 0).any():
        raise ValueError("pool votes must be non-negative")
    if ((a + b) <= 0).any():
        raise ValueError("every pool district needs votes_a + votes_b > 0")
    return NationalPool(a, b, s)

