"""The measures the engine computes: names, documentation and method versions.

``MEASURES`` is what the site's methods page renders; ``MEASURE_VERSIONS`` is stored with every
value (bump a measure's version whenever its formula, tie rule or undefined rule changes).
"""

from __future__ import annotations

from dataclasses import dataclass

FAVOURS_A = "positive favours party a, negative party b"


@dataclass(frozen=True)
class MeasureDoc:
    """Documentation of one measure.

    ``signed``: the value negates when the parties swap.  ``interval``: low/high are given.
    ``p_value``: what the p_value column holds ("" when it is always null).
    """

    name: str
    label: str
    formula: str
    sign: str
    source: str
    signed: bool = False
    interval: bool = False
    p_value: str = ""


MEASURES: list[MeasureDoc] = [
    MeasureDoc(
        "vote_share", "Vote share (a)", "V = sum a_i / sum (a_i + b_i), two-party votes only",
        "share of party a (b's is 1 - V)", "definition",
    ),
    MeasureDoc(
        "seat_share", "Seat share (a)", "S = seats of a / N, an exact tie counting 1/2",
        "share of party a (b's is 1 - S)", "definition",
    ),
    MeasureDoc("seats_a", "Seats (a)", "sum_i s_i, s_i = 1 / 0 / 1/2 for a win / loss / tie", "count", "definition"),
    MeasureDoc("seats_b", "Seats (b)", "N - seats_a", "count", "definition"),
    MeasureDoc("districts", "Districts", "N, single-member contests entering the measures", "count", "definition"),
    MeasureDoc(
        "uncontested", "Uncontested districts", "districts where one major party was absent (before imputation)",
        "count", "definition",
    ),
    MeasureDoc(
        "competitive", "Competitive districts", "#{i : |x_i - 1/2| <= w}, w = competitive_window (default 0.05)",
        "count", "common practice (no single source)",
    ),
    MeasureDoc(
        "efficiency_gap", "Efficiency gap",
        "EG = sum_i (w_b,i - w_a,i) / sum_i n_i; the loser's votes and the winner's votes above n_i/2 "
        "are wasted, a tie wastes n_i/4 each; equals (S_w - 1/2) - 2 (V - 1/2), S_w turnout-weighted",
        FAVOURS_A,
        "Stephanopoulos & McGhee, 82 U. Chi. L. Rev. 831 (2015); McGhee, LSQ 39 (2014)",
        signed=True, interval=True,
    ),
    MeasureDoc(
        "efficiency_gap_equal_turnout", "Efficiency gap (equal-turnout form)", "(S - 1/2) - 2 (V - 1/2)",
        FAVOURS_A, "Stephanopoulos & McGhee (2015), simplified form", signed=True,
    ),
    MeasureDoc(
        "efficiency_gap_seats", "Efficiency gap in seats", "EG x N", FAVOURS_A,
        "Stephanopoulos & McGhee (2015), seat form for congressional plans", signed=True,
    ),
    MeasureDoc(
        "mean_median", "Mean-median difference", "median(x_i) - mean(x_i), unweighted district shares of a",
        FAVOURS_A,
        "McDonald & Best, ELJ 14 (2015); Wang, 68 Stan. L. Rev. 1263 (2016); Best et al., ELJ 17 (2018)",
        signed=True, p_value="two-sided normal p of z = MM / (sqrt(pi/2 - 1) s / sqrt(N))",
    ),
    MeasureDoc(
        "mean_median_z", "Mean-median z", "MM / (sqrt(pi/2 - 1) s / sqrt(N)), s the sample SD of the x_i",
        FAVOURS_A, "SE of median - mean under normality (derived; Wang 2016 uses ~0.756, from memory)",
        signed=True, p_value="two-sided normal p",
    ),
    MeasureDoc(
        "lopsided_t", "Lopsided-outcomes t",
        "-(mean X - mean Y) / SE, X = a's shares where a won, Y = b's shares where b won (ties in "
        "neither); Welch or pooled SE (setting lopsided_variant)",
        FAVOURS_A + " (the negated published t: positive raw t means a's wins are more lopsided)",
        "Wang, 68 Stan. L. Rev. 1263 (2016); ELJ 15 (2016) 367-384",
        signed=True, p_value="two-sided t-test p (lopsided_p)",
    ),
    MeasureDoc(
        "declination", "Declination",
        "-(2/pi) [arctan((2 zbar - 1) N / k') - arctan((1 - 2 ybar) N / k)], k / ybar: seats a lost "
        "and their mean share, k' / zbar: seats a won and theirs; a tie counts 1/2 to each side",
        FAVOURS_A + " (the negated published delta)",
        "Warrington, ELJ 17 (2018), arXiv:1705.09393",
        signed=True, interval=True,
    ),
    MeasureDoc(
        "partisan_bias", "Partisan bias", "S(1/2) - 1/2 under uniform swing of every district share",
        FAVOURS_A, "Tufte, APSR 67 (1973); King & Browning, APSR 81 (1987)",
        signed=True, interval=True,
    ),
    MeasureDoc(
        "symmetry_bias", "Symmetry bias (band average)",
        "mean over v in [1/2 - w, 1/2 + w] of [S(v) - (1 - S(1 - v))] / 2, exact on the step function; "
        "halved (Gelman & King's form) rather than the undivided difference, so that it is on the scale "
        "of partisan bias and equals it as w shrinks to 0 (the undivided average is twice this value)",
        FAVOURS_A, "Gelman & King, AJPS 38 (1994) (band and form from memory)", signed=True,
    ),
    MeasureDoc(
        "responsiveness", "Responsiveness", "[S(V + h) - S(V - h)] / 2h at the observed vote V",
        "not signed (1 = proportional, 3 = cube law at 50 %)",
        "Tufte (1973); cube law: Kendall & Stuart, Br. J. Sociology 1 (1950)",
    ),
    MeasureDoc(
        "seats_at_flipped_vote", "Seats (a) at the flipped vote", "N S(1 - V) under uniform swing",
        "count of a's seats (compare with seats_b)", "uniform swing, as partisan_bias",
    ),
]

MEASURE_NAMES: list[str] = [m.name for m in MEASURES]

#: Method version of each measure: bump on any change of formula, tie rule or undefined rule.
MEASURE_VERSIONS: dict[str, str] = {name: "1" for name in MEASURE_NAMES}
