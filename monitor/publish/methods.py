"""Plain-words explanations of the measures for the methods page.

The formula, sign and source of every measure come from the measures engine
(``monitor.measures.MEASURES``); this table adds one or two sentences a reader without statistics
training can follow. A measure documented with a ``plain`` attribute of its own uses that.
"""

from __future__ import annotations

PLAIN = {
    "vote_share": "Of all votes cast for the two major parties in the state's districts, the share that went to party a.",
    "seat_share": "The share of the state's seats that party a won.",
    "seats_a": "How many seats party a won (a tied seat counts as half).",
    "seats_b": "How many seats party b won.",
    "districts": "How many single-member districts enter the measures.",
    "uncontested": "Districts where one of the two major parties ran no candidate. Their share is imputed "
                   "(or the district is left out) according to the policy in force, and that choice changes results.",
    "competitive": "Districts decided by a narrow margin, within the configured window around 50%.",
    "efficiency_gap": "Counts the votes each party 'wasted': every vote for a losing candidate, and every vote "
                      "for a winner beyond what was needed to win. The gap is the difference between the two "
                      "parties' wasted votes as a share of all votes. A plan that makes one party waste many more "
                      "votes than the other favours the party that wastes fewer.",
    "efficiency_gap_equal_turnout": "A shortcut to the efficiency gap that assumes every district casts the "
                                    "same number of votes: it compares the seat share with twice the vote margin.",
    "efficiency_gap_seats": "The efficiency gap expressed in seats: the gap times the number of districts.",
    "mean_median": "Compares party a's share in the middle district with its average share across districts. "
                   "When a party's voters are packed into a few lopsided districts, its median district does "
                   "worse than its average one.",
    "mean_median_z": "The mean-median difference divided by its standard error: how unusual the difference is "
                     "for a plan of this size if district shares varied at random.",
    "lopsided_t": "Compares how big each party's wins are. If one party wins its seats by much larger margins "
                  "than the other, its voters may have been packed. The test asks whether the difference in "
                  "average winning margins is larger than chance would give.",
    "declination": "Looks at the districts each party won as two groups and compares the angle from the "
                   "50% line to the middle of each group. A kink at 50% suggests one side's wins were arranged "
                   "to be narrow and the other's to be lopsided.",
    "partisan_bias": "Shifts every district by the same amount until the statewide vote is exactly 50-50, then "
                     "asks how many more (or fewer) than half of the seats party a would win.",
    "symmetry_bias": "The same question as partisan bias, averaged over a band of statewide votes around 50%, so "
                     "that a single close district does not decide it.",
    "responsiveness": "How many seats change hands per point of statewide vote near the observed result. "
                      "A steep curve means small swings move many seats.",
    "seats_at_flipped_vote": "The seats party a would win if the statewide vote were flipped (a's share becoming "
                             "b's). A symmetric plan gives a, at b's vote, the seats b actually won.",
}


def plain_words(doc) -> str:
    """The plain-words text of a measure's documentation object."""
    own = getattr(doc, "plain", None)
    if own:
        return own
    return PLAIN.get(doc.name, "")
