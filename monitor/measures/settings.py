"""Settings of the measures engine (the ``[measures]`` section of levelfield.toml)."""

from __future__ import annotations

from dataclasses import dataclass, fields

from .swing import REFERENCES
from .ttest import VARIANTS


@dataclass(frozen=True)
class MeasureSettings:
    """How the engine computes the measures.  Invalid values raise one ValueError naming all.

    Changing a setting changes results: store the settings (or a hash of them) beside them.
    """

    competitive_window: float = 0.05
    """A district is competitive when |x_i - 1/2| <= this (inclusive).  +-5 points is common
    practice; no single source."""

    lopsided_variant: str = "welch"
    """t-test of the lopsided-outcomes test: "welch" (unequal variances) or "pooled" (Student).
    Which one Wang (2016) used is not verified; pages must name the variant."""

    symmetry_band: float = 0.05
    """Half-width w of the band [1/2 - w, 1/2 + w] over which symmetry_bias averages
    [S(v) - (1 - S(1 - v))]/2; 0 gives partisan_bias.  The 45-55 % band follows Gelman & King
    (1994), from memory."""

    responsiveness_h: float = 0.05
    """Half-width h of the central difference [S(V + h) - S(V - h)] / 2h at the observed vote.
    Project choice: S is a step function, so h must be wide enough to hold some districts for
    small delegations; 5 points matches the competitive window (responsiveness is then the
    share of districts within 5 points of 50 %, divided by 0.1)."""

    swing_reference: str = "vote_weighted"
    """Uniform swing shifts from the statewide vote-weighted share ("vote_weighted", as the
    issue specifies) or from the unweighted mean district share ("district_mean")."""

    interval_draws: int = 1000
    """Simulated elections behind each interval (rounded up to even: antithetic pairs); 0 turns
    intervals off."""

    noise_sd: float = 0.03
    """SD of the independent district-level share noise of the interval simulation (Gelman &
    King 1994-style hypothetical elections; the value is a project choice, not an estimate)."""

    interval_level: float = 0.95
    """Coverage of the percentile intervals."""

    min_districts: int = 2
    """Asymmetry measures need at least this many districts (descriptive counts do not)."""

    def __post_init__(self):
        problems = []

        def number(name, low, high, *, low_open=False, integer=False):
            value = getattr(self, name)
            kinds = (int,) if integer else (int, float)
            if isinstance(value, bool) or not isinstance(value, kinds):
                problems.append(f"{name} must be {'an integer' if integer else 'a number'}, got {value!r}")
            elif value < low or (low_open and value == low) or value > high:
                bracket = "(" if low_open else "["
                problems.append(f"{name} must lie in {bracket}{low}, {high}], got {value!r}")

        number("competitive_window", 0.0, 0.5)
        number("symmetry_band", 0.0, 0.5)
        number("responsiveness_h", 0.0, 0.5, low_open=True)
        number("interval_draws", 0, 10_000_000, integer=True)
        number("noise_sd", 0.0, 0.5)
        number("interval_level", 0.0, 1.0, low_open=True)
        number("min_districts", 1, 1_000_000, integer=True)
        if self.interval_level == 1.0:
            problems.append("interval_level must be below 1")
        if self.lopsided_variant not in VARIANTS:
            problems.append(f"lopsided_variant must be one of {VARIANTS}, got {self.lopsided_variant!r}")
        if self.swing_reference not in REFERENCES:
            problems.append(f"swing_reference must be one of {REFERENCES}, got {self.swing_reference!r}")
        if problems:
            raise ValueError("invalid measure settings: " + "; ".join(problems))

    @classmethod
    def names(cls) -> list[str]:
        """The setting names, in declaration order."""
        return [f.name for f in fields(cls)]
