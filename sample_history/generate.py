#!/usr/bin/env python3
"""Generate the invented sample history of the Quillandar Federation, 1972-2024 (and 2026).

Everything here is invented: the federation, its 36 states, its parties, its candidates and every
vote. The scenario (states, populations, who draws which plan, the engineered situations of the
answer key) is fixed in this file; ``--seed`` drives only the noise of the elections (district
leans within a plan, swings, turnout, candidates, which seats go uncontested).

Model, on the logit scale of party a's two-party share x (a positive, b negative)::

    logit x = state lean (slow linear drift) + district offset (set by the plan in force)
            + national swing of the cycle + state swing of the cycle
            + incumbency (+/- when an incumbent runs) + district noise

Turnout = district population x adult share x a state base rate x 0.76 in midterm years
(cycles not divisible by 4) x a district factor fixed for the plan x a small cycle factor.
See README.md beside this file for the model, the plans and the answer key.

Usage: ``python sample_history/generate.py [--seed N] [--out DIR]`` (default DIR: this folder).
Pure numpy + standard library; the same seed gives byte-identical files.
"""

from __future__ import annotations

import argparse
import csv
import functools
import zlib
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np

HERE = Path(__file__).resolve().parent
DEFAULT_SEED = 1972

FEDERATION = "Quillandar Federation"
CYCLES = tuple(range(1972, 2025, 2))
NEXT_CYCLE = 2026
CENSUSES = tuple(range(1970, 2021, 10))
PLAN_HORIZON = 2030  # last cycle before the next census: the end of the plans now in force
FEDERAL_SEATS = 300
FEDERAL, STATE_LOWER, STATE_UPPER = "federal", "state_lower", "state_upper"
SOURCE = "invented: sample_history/generate.py"

# --- parties --------------------------------------------------------------------------------
PARTY_A = {"name": "Harbour Party", "labels": ("Harbour Party", "Hearth Alliance"), "colour": "#11808a"}
PARTY_B = {"name": "Upland Party", "labels": ("Upland Party",), "colour": "#d4900f"}
A_MAIN, A_ALLIED = PARTY_A["labels"]
B_MAIN = PARTY_B["labels"][0]
MINOR_LABELS = ("Granite League", "Open Commons")
WRITE_IN = "Write-in"

# --- states: code, name, population in 1970 (thousands), yearly growth, lean (logit, + = a) -------
STATES = (
    ("JS", "Jastra", 11000, 0.006, -0.04),
    ("WT", "Wistral", 6200, 0.020, 0.00),
    ("YR", "Yallow Reach", 7600, 0.006, 0.08),
    ("OB", "Ombrecy", 7400, 0.005, 0.10),
    ("HD", "Helmsdene", 6400, 0.005, -0.08),
    ("WD", "Wendmark", 6600, 0.002, 0.00),
    ("EB", "Emberlee", 6700, -0.002, 0.08),
    ("JW", "Jurrow", 6000, -0.004, 0.04),
    ("HC", "Harnacle Cove", 5000, 0.009, 0.12),
    ("OV", "Orvenne", 4300, 0.013, -0.10),
    ("EV", "Elvaine", 4900, 0.006, 0.02),
    ("HY", "Hollenby", 5000, 0.001, -0.20),
    ("JR", "Jorrelin", 5200, 0.004, 0.25),
    ("YM", "Ysmere", 3800, 0.006, -0.03),
    ("EK", "Eskarre", 4200, 0.010, -0.35),
    ("OD", "Ondavel", 3900, 0.016, 0.30),
    ("WR", "Wrenstowe", 4100, -0.003, -0.25),
    ("JD", "Jennet Downs", 3500, 0.007, 0.05),
    ("HH", "Hathermoor", 3400, 0.003, 0.03),
    ("EF", "Esterfold", 3000, 0.012, -0.45),
    ("OT", "Ostrivane", 2900, 0.000, 0.40),
    ("YV", "Yvessa", 2600, 0.015, -0.30),
    ("WM", "Wickmarsh", 2500, 0.002, 0.35),
    ("HL", "Hilvarre", 2200, 0.009, -0.55),
    ("JV", "Jorvath", 2000, 0.004, 0.50),
    ("OS", "Ossavine", 1900, -0.002, -0.10),
    ("EW", "Ewerstone", 1900, 0.011, 0.45),
    ("YW", "Yarrowmere", 1500, 0.003, -0.40),
    ("JL", "Jalomir", 1300, 0.008, 0.15),
    ("WN", "Winnowby", 1200, 0.000, -0.60),
    ("OY", "Olvary", 1100, 0.013, 0.55),
    ("WL", "Wollafen", 1050, -0.006, -0.20),
    ("EY", "Ebbery", 520, 0.022, 0.30),
    ("HF", "Hallowfen", 450, 0.004, -0.50),
    ("YO", "Yorvelt", 400, 0.006, 0.60),
    ("QO", "Quorrin", 320, 0.010, -0.30),
)
STATE_CODES = tuple(s[0] for s in STATES)
STATE_INDEX = {s[0]: i for i, s in enumerate(STATES)}

# State legislature lower chambers: districts (the HH chamber has one two-seat district).
STATE_LOWER_SIZES = {"JS": 40, "EB": 40, "HH": 59, "WD": 60, "OV": 120, "EV": 80, "YR": 100, "JR": 70}
MULTI_MEMBER = ("HH", STATE_LOWER, "007")  # elects two members every cycle
# Lower chambers added later, each of its own kind: every district elects two members by block
# voting (each voter has two votes, the top two candidates win) in EK and OD; in HY every district
# elects two members to numbered seats (positions 1 and 2, each a contest of its own).
BLOCK_VOTING = {"EK": 30, "OD": 26}
NUMBERED_SEATS = {"HY": 40}
POSITIONS = ("1", "2")
# State senates (upper chambers): staggered in two classes. Every seat is elected in the first
# cycle of a plan; then the odd-numbered districts two years later, the even-numbered ones four
# years later, and so on alternately (so a cycle elects about half the chamber).
STATE_UPPER_SIZES = {"JS": 24, "EB": 24, "WD": 30, "OV": 40, "EV": 40, "JR": 36, "YR": 50}
CLASSES = 2
# the chambers added after the first version of the sample: their own random streams and names,
# so that the federal and original state-house results stay as they were
ADDED = ({(s, STATE_LOWER) for s in (*BLOCK_VOTING, *NUMBERED_SEATS)}
         | {(s, STATE_UPPER) for s in STATE_UPPER_SIZES})
SAME_PARTY_GENERAL = ("WD", STATE_LOWER, 2014)  # the safest Harbour seat: two Harbour candidates
FUSION = ("EW", FEDERAL, 2002, 2010)  # the Harbour candidate of EW's most marginal Harbour seat is also
#                                        the Hearth Alliance candidate (always contested)
CORRECTION = ("JD", FEDERAL, 2016, "03")  # a recount flips this seat; corrections/ holds the whole unit

# National swing by cycle (logit, + = toward a); the seed adds small noise around these.
NATIONAL_SWING = {
    1972: -0.02, 1974: 0.16, 1976: 0.06, 1978: 0.00, 1980: -0.12, 1982: 0.06, 1984: -0.05,
    1986: 0.04, 1988: 0.01, 1990: 0.03, 1992: 0.02, 1994: -0.22, 1996: -0.02, 1998: 0.01,
    2000: -0.02, 2002: -0.04, 2004: -0.03, 2006: 0.30, 2008: 0.14, 2010: -0.24, 2012: 0.02,
    2014: -0.10, 2016: -0.02, 2018: 0.16, 2020: 0.04, 2022: -0.04, 2024: -0.02, 2026: 0.06,
}
WAVE_CYCLE = 2006


# --- plans ------------------------------------------------------------------------------------
@dataclass(frozen=True)
class Spec:
    """What a plan is meant to be: its geometry (kind), who drew it and what a watchdog should see."""

    kind: str  # neutral | commission | gerrymander | thin | protect | clustered | remedial | at_large
    drawn_by: str
    note: str
    drawer: str = ""  # party whose plan it is (gerrymander kinds) or whom it leans to (remedial)
    expected: str = ""  # answer key verdict; "" = not in the answer key
    measured: str = ""  # what the measures are expected to show when it differs from the intent
    break_cycle: int | None = None
    # what the watch list must show for the plan with the default seed: "a", "b" or "" (not on watch)
    watch: str = ""


def _gerry(drawer, note="", kind="gerrymander", **kw):
    """A plan drawn by ``drawer`` that packs the other party into a few seats and cracks the rest."""
    own, other = ("Harbour", "Upland") if drawer == "a" else ("Upland", "Harbour")
    share = round(100 * CRACK_TARGET[kind])
    text = f"{own} packs {other} voters into a few lopsided seats and wins the rest at ~{share}%"
    return Spec(kind, f"party_{drawer}", f"{text}; {note}" if note else text, drawer=drawer,
                expected=f"favours_{drawer}", watch=drawer, **kw)


def _commission(note="independent commission; neutral criteria"):
    return Spec("commission", "commission", note, expected="neutral")


CRACK_TARGET = {"gerrymander": 0.58, "thin": 0.535}  # drawer's share in a cracked district
CLUSTER_NOTE = ("compact plan drawn to neutral criteria by a divided legislature; Harbour voters live "
                "concentrated in the cities, so the districts pack them naturally: measures show "
                "asymmetry favouring Upland")

# (state, chamber, first cycle) -> Spec; every other plan is a neutral partition.
ENGINEERED: dict[tuple[str, str, int], Spec] = {
    ("JW", FEDERAL, 1972): _gerry("b"),
    ("EB", FEDERAL, 1982): _gerry("b"),
    ("JS", FEDERAL, 1992): _gerry("a"),
    ("WD", FEDERAL, 1992): Spec("protect", "split", "incumbent protection: every seat safe for its holder, "
                                "seats split in line with the vote; few competitive seats",
                                expected="neutral"),
    ("HC", FEDERAL, 2002): _gerry("b", f"drawn too thin: the {WAVE_CYCLE} wave toward Harbour breaks it",
                                  kind="thin", break_cycle=WAVE_CYCLE),
    ("OV", FEDERAL, 2006): _gerry("a", "mid-decade redraw after Harbour won full control in 2004"),
    ("HD", FEDERAL, 2012): _gerry("a"),
    ("YR", FEDERAL, 2012): _gerry("b", "struck down by the state court after the 2016 election"),
    ("YR", FEDERAL, 2018): Spec("remedial", "court", "court-ordered remedial plan replacing the 2012 Upland "
                                "gerrymander; measures show a mild asymmetry of the opposite sign (favouring "
                                "Harbour), inside the national range", drawer="a",
                                expected="neutral", measured="favours_a"),
    ("YR", FEDERAL, 2022): _commission("commission created by referendum after the court case"),
    ("HD", FEDERAL, 2022): _gerry("a", "redrawn by Harbour after the census"),
    ("WT", FEDERAL, 2022): _gerry("b"),
    ("HY", FEDERAL, 1986): Spec("neutral", "split", "mid-decade redraw to fix population deviations; "
                                "not engineered"),
}
for _first in (2002, 2012, 2022):  # each party holds a state-house gerrymander through three censuses
    ENGINEERED[("JS", STATE_LOWER, _first)] = _gerry("a", "state house, redrawn after each census")
    ENGINEERED[("JS", STATE_UPPER, _first)] = _gerry("a", "staggered state senate, redrawn after each census")
    ENGINEERED[("EB", STATE_UPPER, _first)] = _gerry("b", "staggered state senate, redrawn after each census")
    ENGINEERED[("EB", STATE_LOWER, _first)] = _gerry("b", "state house, redrawn after each census")
for _first in (1992, 2002, 2012, 2022):
    ENGINEERED[("EV", FEDERAL, _first)] = _commission()
    ENGINEERED[("EV", STATE_LOWER, _first)] = _commission()
    ENGINEERED[("HH", STATE_LOWER, _first)] = _commission()
for _first in (2002, 2012, 2022):
    ENGINEERED[("YM", FEDERAL, _first)] = _commission()
for _first in (1972, 1982, 1992, 2002, 2012, 2022):
    ENGINEERED[("OB", FEDERAL, _first)] = Spec("clustered", "split", CLUSTER_NOTE, expected="neutral",
                                               measured="favours_b", watch="b")

MID_DECADE = {("HY", FEDERAL): (1986,), ("OV", FEDERAL): (2006,), ("YR", FEDERAL): (2018,)}

# Geometry parameters (two-party share of a unless stated)
# neutral partition: SD of the district shares around the state's share (share units); state-house
# districts are smaller, so more homogeneous and more spread out than federal ones
NEUTRAL_SPREAD = {FEDERAL: 0.13, STATE_LOWER: 0.17, STATE_UPPER: 0.15}
PACKED = (0.76, 0.84)  # victim's share in a packed district
PROTECT_OFFSET = 0.85  # logit distance of a protected seat from the state lean
CITY_FRACTION, CITY_SHARE = 0.25, (0.76, 0.84)
REMEDIAL_WEIGHT = 0.25  # remedial plan: this much of a gerrymander's shape, the rest neutral
# Personal vote of a sitting member (logit). Small in the state houses: with 40-120 seats the
# within-state tests see the majority's incumbency bonus (its incumbent holds the median seat) as
# asymmetry; see README "Why the state houses are modelled as they are".
INCUMBENCY = {FEDERAL: 0.20, STATE_LOWER: 0.05, STATE_UPPER: 0.05}
# Chance that the weaker major party stays out: top / (1 + exp(-(margin - midpoint) / width)), with
# margin = |expected share - 1/2|. Set so that uncontested seats would have given their winner 75%
# on average, the share the sample's levelfield.toml imputes (imputation unbiased on average).
UNCONTESTED = {FEDERAL: (0.40, 0.21, 0.03), STATE_LOWER: (0.42, 0.20, 0.03), STATE_UPPER: (0.42, 0.20, 0.03)}
DISTRICT_NOISE = {FEDERAL: 0.10, STATE_LOWER: 0.13, STATE_UPPER: 0.12}
STATE_NOISE, SWING_NOISE = 0.02, 0.03
RETIRE = {FEDERAL: 0.10, STATE_LOWER: 0.12, STATE_UPPER: 0.12}  # chance a sitting member does not run again
ADULT_SHARE, MIDTERM_TURNOUT = 0.71, 0.76  # adults per resident; turnout factor of a midterm year


@dataclass(frozen=True)
class Plan:
    state: str
    chamber: str
    plan_id: str
    first_cycle: int
    last_cycle: int
    spec: Spec


@dataclass
class District:
    code: str
    offset: float  # logit offset from the state lean
    seats: int
    pop_share: float  # share of the state's population
    turnout_factor: float
    drift: float  # relative population drift per decade
    positions: tuple[str, ...] = ()  # numbered seats: one contest per position
    klass: int = 0  # staggered chamber: 1 (odd-numbered districts) or 2 (even-numbered)


@dataclass
class Chamber:
    """The running state of one (state, chamber): plan in force, its districts and incumbents."""

    plan: Plan | None = None
    districts: list[District] = field(default_factory=list)
    incumbents: dict[str, list[tuple[str, str]]] = field(default_factory=dict)  # code -> [(party, name)]


# --- helpers ----------------------------------------------------------------------------------
def rng_for(seed: int, *parts) -> np.random.Generator:
    """An independent stream per purpose: parts are ints or texts (texts hashed with crc32)."""
    words = [seed] + [p if isinstance(p, int) else zlib.crc32(str(p).encode()) for p in parts]
    return np.random.default_rng(words)


def logit(x):
    return np.log(x) - np.log1p(-x)


def expit(z):
    return 1.0 / (1.0 + np.exp(-z))


def recentre(offsets: np.ndarray, lean: float) -> np.ndarray:
    """Shift offsets so the districts' mean share equals the state's, expit(lean), as in any partition
    of equal-population districts (Newton steps on the common shift)."""
    target = expit(lean)
    shift = 0.0
    for _ in range(30):
        x = expit(lean + offsets + shift)
        gap = float(x.mean()) - target
        if abs(gap) < 1e-12:
            break
        shift -= gap / float((x * (1 - x)).mean())
    return offsets + shift


def huntington_hill(pops: np.ndarray, total: int) -> np.ndarray:
    """Method of equal proportions, one seat minimum per state."""
    seats = np.ones(len(pops), dtype=int)
    while seats.sum() < total:
        priority = pops / np.sqrt(seats * (seats + 1.0))
        seats[int(np.argmax(priority))] += 1
    return seats


def population(state: str, year: float) -> float:
    _, _, p0, growth, _ = STATES[STATE_INDEX[state]]
    return p0 * 1000.0 * (1.0 + growth) ** (year - 1970)


def apportionment() -> dict[int, dict[str, int]]:
    out = {}
    for census in CENSUSES:
        pops = np.array([population(s, census) for s in STATE_CODES])
        out[census] = dict(zip(STATE_CODES, (int(n) for n in huntington_hill(pops, FEDERAL_SEATS))))
    return out


def census_of(cycle: int) -> int:
    return min(((cycle - 1) // 10) * 10, CENSUSES[-1])


def is_midterm(cycle: int) -> bool:
    return cycle % 4 != 0


@functools.cache
def drift_slope(state: str) -> float:
    """Lean change over 1972-2024: none in the states of the answer key (their plans fit), else random."""
    if any(key[0] == state for key in ENGINEERED):
        return 0.0
    return float(rng_for(0, "drift", state).normal(0.0, 0.12))


def state_lean(state: str, cycle: int) -> float:
    """Fixed scenario lean plus a linear drift centred on 1998."""
    return STATES[STATE_INDEX[state]][4] + drift_slope(state) * (cycle - 1998) / 26.0


# --- names ------------------------------------------------------------------------------------
GIVEN_HEAD = ("Al", "Bre", "Cal", "Dor", "Ei", "Fen", "Gre", "Hal", "Ilo", "Jor", "Ka", "Lis", "Mor",
              "Ne", "Or", "Pe", "Quo", "Ri", "Sa", "Te", "Ul", "Va", "Wy", "Ys", "Zo")
GIVEN_TAIL = ("ric", "wen", "dan", "lis", "ma", "ven", "ra", "tor", "nis", "bel", "mir", "sa", "do",
              "len", "thea", "vin")
SUR_HEAD = ("Ash", "Brin", "Cald", "Dun", "Esk", "Fal", "Gorr", "Harr", "Ist", "Jarr", "Kell", "Lorr",
            "Marr", "Nesk", "Oll", "Penn", "Quarr", "Rast", "Sill", "Torr", "Umm", "Vask", "Wend",
            "Yarr", "Zell")
SUR_LINK = ("", "a", "i", "o")
SUR_TAIL = ("vane", "quist", "marrow", "ellin", "oth", "usk", "evin", "arro", "imbe", "ozen", "ardy",
            "ethe", "ulm", "wyke")


class Names:
    """Invented candidate names, unique over the whole history."""

    def __init__(self, rng: np.random.Generator):
        self.rng = rng
        self.used: set[str] = set()

    def surname(self) -> str:
        r = self.rng
        return (SUR_HEAD[r.integers(len(SUR_HEAD))] + SUR_LINK[r.integers(len(SUR_LINK))]
                + SUR_TAIL[r.integers(len(SUR_TAIL))])

    def new(self) -> str:
        r = self.rng
        while True:
            given = GIVEN_HEAD[r.integers(len(GIVEN_HEAD))] + GIVEN_TAIL[r.integers(len(GIVEN_TAIL))]
            name = f"{given} {self.surname()}"
            if name not in self.used:
                self.used.add(name)
                return name


class DoubleNames(Names):
    """Names of the chambers added later: a double surname (``Given Sur-Sur``), a shape the first
    stream never makes, so the two streams never give the same name."""

    def surname(self) -> str:
        return f"{super().surname()}-{super().surname()}"


# --- plan schedule and geometry ----------------------------------------------------------------
def chambers_of(state: str) -> tuple[str, ...]:
    lower = state in STATE_LOWER_SIZES or state in BLOCK_VOTING or state in NUMBERED_SEATS
    return (FEDERAL,) + ((STATE_LOWER,) if lower else ()) + ((STATE_UPPER,) if state in STATE_UPPER_SIZES else ())


def plan_schedule(seats: dict[int, dict[str, int]]) -> list[Plan]:
    """Every plan of every (state, chamber): one per census, plus the mid-decade redraws."""
    control = rng_for(0, "control")
    plans = []
    for state in STATE_CODES:
        for chamber in chambers_of(state):
            starts = sorted({c + 2 for c in CENSUSES} | set(MID_DECADE.get((state, chamber), ())))
            who = rng_for(0, "control", state, chamber) if (state, chamber) in ADDED else control
            for i, first in enumerate(starts):
                last = starts[i + 1] - 2 if i + 1 < len(starts) else PLAN_HORIZON
                drawn = ("party_a", "party_b", "split")[int(who.choice(3, p=(0.35, 0.35, 0.30)))]
                spec = ENGINEERED.get((state, chamber, first))
                if chamber == FEDERAL and seats[census_of(first)][state] == 1:
                    spec = Spec("at_large", "other", "single at-large seat: no districts drawn")
                elif spec is None:
                    spec = Spec("neutral", drawn, "not engineered: districts drawn like a neutral partition")
                plans.append(Plan(state, chamber, f"{state}-{chamber}-{first}", first, last, spec))
    return plans


def neutral_shares(rng, n, v_a, spread):
    """A neutral partition's district shares: symmetric around the state's share ``v_a`` in share
    space (so that median = mean and no measure of asymmetry sees a skew by construction), with SD
    about ``spread``. One district in each n-quantile band of a logistic law (a realistic spread
    without the chance skews that an unlucky i.i.d. draw of a few districts gives), squashed
    symmetrically (tanh) to stay inside (0.03, 0.97)."""
    u = (np.arange(n) + rng.uniform(0.05, 0.95, n)) / n
    dev = spread * np.sqrt(3.0) / np.pi * logit(u)
    cap = min(v_a, 1.0 - v_a) - 0.03
    dev = cap * np.tanh(dev / cap)
    return v_a + dev - dev.mean()


def commission_shares(rng, n, v_a, spread):
    """A neutral draw made exactly symmetric around the state's share (mirrored pairs)."""
    dev = np.sort(neutral_shares(rng, n, v_a, spread) - v_a)[n - n // 2:]
    return v_a + np.concatenate([dev, -dev, np.zeros(n % 2)])


def gerrymander_shares(rng, n, v_a, drawer, target):
    """Drawer's voters cracked at ~target in most seats, the victim's packed into the rest."""
    v = v_a if drawer == "a" else 1.0 - v_a
    packed_victim = rng.uniform(*PACKED, size=n)
    best = None
    for k in range(1, n):
        crack = (n * v - (1.0 - packed_victim[:k]).sum()) / (n - k)
        if best is None or abs(crack - target) < abs(best[1] - target):
            best = (k, crack)
    k, crack = best
    cracked = crack + rng.uniform(-0.015, 0.015, n - k)
    cracked += crack - cracked.mean()
    drawer_share = np.concatenate([1.0 - packed_victim[:k], cracked])
    return drawer_share if drawer == "a" else 1.0 - drawer_share


def clustered_shares(rng, n, v_a):
    k = max(2, int(round(CITY_FRACTION * n)))
    city = rng.uniform(*CITY_SHARE, size=k)
    rest_mean = (n * v_a - city.sum()) / (n - k)
    rest = rest_mean + rng.normal(0.0, 0.05, n - k)
    rest += rest_mean - rest.mean()
    return np.concatenate([city, rest])


def protect_offsets(rng, n, v_a, holders):
    """Each seat safe for its holder; a's count set so seats track votes (EG near zero)."""
    n_a = int(np.clip(round(n * (2.0 * v_a - 0.5)), 0, n))
    order = sorted(range(n), key=lambda i: (holders[i] != "a", i))  # a-held seats first
    party = np.array(["b"] * n)
    party[order[:n_a]] = "a"
    sign = np.where(party == "a", 1.0, -1.0)
    return sign * PROTECT_OFFSET + rng.normal(0.0, 0.10, n)


def plan_offsets(rng, spec: Spec, n: int, lean: float, holders: list[str], chamber: str) -> np.ndarray:
    v_a = float(expit(lean))
    kind = spec.kind
    spread = NEUTRAL_SPREAD[chamber]
    if kind == "at_large" or n == 1:
        return np.zeros(n)
    if kind == "neutral":
        return rng.permutation(logit(neutral_shares(rng, n, v_a, spread)) - lean)
    elif kind == "commission":
        return rng.permutation(logit(commission_shares(rng, n, v_a, spread)) - lean)
    elif kind in CRACK_TARGET:
        off = logit(gerrymander_shares(rng, n, v_a, spec.drawer, CRACK_TARGET[kind])) - lean
    elif kind == "clustered":
        off = logit(np.clip(clustered_shares(rng, n, v_a), 0.05, 0.95)) - lean
    elif kind == "protect":
        return recentre(protect_offsets(rng, n, v_a, holders), lean)
    elif kind == "remedial":
        base = np.sort(logit(commission_shares(rng, n, v_a, spread)) - lean)
        shares = gerrymander_shares(rng, n, v_a, spec.drawer, CRACK_TARGET["gerrymander"])
        tilt = np.sort(logit(shares) - lean)
        off = (1.0 - REMEDIAL_WEIGHT) * base + REMEDIAL_WEIGHT * tilt
    else:
        raise ValueError(f"unknown plan kind {kind!r}")
    return rng.permutation(recentre(off, lean))


def district_codes(n: int, chamber: str) -> list[str]:
    if n == 1:
        return ["AL"]
    width = 2 if chamber == FEDERAL else 3
    return [str(i + 1).zfill(width) for i in range(n)]


# --- the election model -------------------------------------------------------------------------
class History:
    def __init__(self, seed: int):
        self.seed = seed
        self.seats = apportionment()
        self.plans = plan_schedule(self.seats)
        self.by_unit: dict[tuple[str, str], list[Plan]] = {}
        for plan in self.plans:
            self.by_unit.setdefault((plan.state, plan.chamber), []).append(plan)
        self.names = self.first_names = Names(rng_for(seed, "names"))
        self.added_names = DoubleNames(rng_for(seed, "names", "added chambers"))
        self.chambers = {key: Chamber() for key in self.by_unit}
        self.turnout_base = {s: float(rng_for(0, "turnout", s).uniform(0.52, 0.66)) for s in STATE_CODES}
        self.fusion_name = ""
        self.correction_rows: list[tuple] = []

    # plan in force ------------------------------------------------------------------------
    def plan_for(self, state, chamber, cycle) -> Plan:
        for plan in self.by_unit[(state, chamber)]:
            if plan.first_cycle <= cycle <= plan.last_cycle:
                return plan
        raise LookupError((state, chamber, cycle))

    def n_districts(self, state, chamber, cycle) -> int:
        if chamber == FEDERAL:
            return self.seats[census_of(cycle)][state]
        if chamber == STATE_UPPER:
            return STATE_UPPER_SIZES[state]
        return {**STATE_LOWER_SIZES, **BLOCK_VOTING, **NUMBERED_SEATS}[state]

    def start_plan(self, ch: Chamber, plan: Plan, cycle: int) -> None:
        rng = rng_for(self.seed, "plan", plan.plan_id)
        n = self.n_districts(plan.state, plan.chamber, cycle)
        lean = state_lean(plan.state, cycle)
        codes = district_codes(n, plan.chamber)
        old = ch.incumbents
        holders = []
        for code in codes:
            held = old.get(code)
            holders.append(held[0][0] if held else ("a" if rng.random() < expit(lean) else "b"))
        offsets = plan_offsets(rng, plan.spec, n, lean, holders, plan.chamber)
        pop = np.exp(rng.normal(0.0, 0.01, n))
        pop /= pop.sum()
        districts = [District(code, float(off), 1, float(p), float(np.exp(rng.normal(0.0, 0.10))),
                              float(rng.normal(0.0, 0.03)))
                     for code, off, p in zip(codes, offsets, pop)]
        if (plan.state, plan.chamber) == MULTI_MEMBER[:2]:
            for d in districts:
                if d.code == MULTI_MEMBER[2]:
                    d.seats = 2
        for i, d in enumerate(districts):
            if plan.chamber == STATE_LOWER and plan.state in BLOCK_VOTING:
                d.seats = 2
            if plan.chamber == STATE_LOWER and plan.state in NUMBERED_SEATS:
                d.positions = POSITIONS
            if plan.chamber == STATE_UPPER:
                d.klass = 1 if i % 2 == 0 else 2  # district 001 is odd-numbered
        # incumbents: protected seats keep their holder; elsewhere the state's sitting members of the
        # favoured party take the new seats they are safest in.
        pools = {"a": [], "b": []}
        for code in sorted(old):
            for party, name in old[code]:
                pools[party].append(name)
        new_inc: dict[str, list[tuple[str, str]]] = {}
        if plan.spec.kind == "protect":
            for d in districts:
                party, name = old[d.code][0] if old.get(d.code) else ("", "")
                if party and (d.offset > 0) == (party == "a"):
                    new_inc[d.code] = [(party, name)]
                    pools[party].remove(name)
        for i in sorted(range(n), key=lambda i: -abs(districts[i].offset)):
            d = districts[i]
            if d.seats > 1 or d.positions or d.code in new_inc:
                continue
            party = "a" if lean + d.offset > 0 else "b"
            if pools[party] and rng.random() < 0.85:
                new_inc[d.code] = [(party, pools[party].pop(0))]
        ch.plan, ch.districts, ch.incumbents = plan, districts, new_inc

    # one cycle -----------------------------------------------------------------------------
    def simulate(self, cycle: int, chambers=(FEDERAL, STATE_LOWER, STATE_UPPER)) -> list[tuple]:
        swing = NATIONAL_SWING[cycle] + rng_for(self.seed, "swing", cycle).normal(0.0, SWING_NOISE)
        rows: list[tuple] = []
        for state in STATE_CODES:
            state_swing = rng_for(self.seed, "state-swing", state, cycle).normal(0.0, STATE_NOISE)
            for chamber in chambers_of(state):
                if chamber not in chambers:
                    continue
                rows.extend(self.simulate_unit(state, chamber, cycle, swing + state_swing))
        return rows

    def simulate_unit(self, state, chamber, cycle, swing) -> list[tuple]:
        self.names = self.added_names if (state, chamber) in ADDED else self.first_names
        ch = self.chambers[(state, chamber)]
        plan = self.plan_for(state, chamber, cycle)
        if ch.plan is not plan:
            self.start_plan(ch, plan, cycle)
        rng = rng_for(self.seed, "unit", state, chamber, cycle)
        lean = state_lean(state, cycle)
        state_pop = population(state, cycle)
        turnout = self.turnout_base[state] * (MIDTERM_TURNOUT if is_midterm(cycle) else 1.0)
        safest_a = max(ch.districts, key=lambda d: d.offset).code
        harbour_seats = [d for d in ch.districts if lean + d.offset > 0] or ch.districts
        marginal_a = min(harbour_seats, key=lambda d: abs(lean + d.offset)).code
        rows: list[tuple] = []
        corrected: list[tuple] = []
        next_inc: dict[str, list[tuple[str, str]]] = {}
        up = class_up(cycle, ch.plan.first_cycle)
        for d in ch.districts:
            if d.klass and up and d.klass != up:  # staggered: this seat is not up this cycle
                if d.code in ch.incumbents:
                    next_inc[d.code] = ch.incumbents[d.code]
                continue
            if d.positions:
                rows.extend(self.numbered_seats(rng, ch, d, cycle, state, chamber, lean + d.offset + swing,
                                                state_pop, turnout, next_inc))
                continue
            years = cycle - ch.plan.first_cycle
            pop = state_pop * d.pop_share * d.seats * np.exp(d.drift * years / 10.0)
            cycle_factor = np.exp(rng.normal(0.0, 0.03))
            votes_cast = int(round(pop * ADULT_SHARE * turnout * d.turnout_factor * cycle_factor))
            sitting = [m for m in ch.incumbents.get(d.code, []) if rng.random() >= RETIRE[chamber]]
            fusion = (FUSION[:2] == (state, chamber) and FUSION[2] <= cycle <= FUSION[3]
                      and d.code == marginal_a)
            if fusion:
                if not self.fusion_name:
                    self.fusion_name = self.names.new()
                sitting = [m for m in sitting if m[0] != "a"] + [("a", self.fusion_name)]
            base = lean + d.offset + swing
            if d.seats > 1 and state in BLOCK_VOTING:
                lines, winners = self.block_voting(rng, d, base, votes_cast, sitting)
            elif d.seats > 1:
                lines, winners = self.multi_member(rng, d, base, votes_cast, sitting)
            else:
                inc_party = sitting[0][0] if sitting else ""
                inc = INCUMBENCY[chamber] * (1 if inc_party == "a" else -1 if inc_party == "b" else 0)
                expected = float(expit(base + inc))
                share = float(expit(base + inc + rng.normal(0.0, DISTRICT_NOISE[chamber])))
                forced_close = (state, chamber, cycle, d.code) == CORRECTION
                if forced_close:
                    share = 0.5013
                same_party = (state, chamber, cycle) == SAME_PARTY_GENERAL and d.code == safest_a
                lines, winners = self.single_member(rng, chamber, expected, share, votes_cast, sitting,
                                                    forced_close or fusion, same_party)
                if fusion:
                    lines = self.fuse(rng, lines)
                if forced_close:
                    fixed, winners = self.recount(rng, lines)
                    corrected = [(cycle, state, chamber, d.code, p, c, v, d.seats, w, "") for p, c, v, w in fixed]
            for party, cand, votes, writein in lines:
                rows.append((cycle, state, chamber, d.code, party, cand, votes, d.seats, writein, ""))
            next_inc[d.code] = winners
        ch.incumbents = next_inc
        if corrected:
            district = CORRECTION[3]
            self.correction_rows = [r for r in rows if r[3] != district] + corrected
        return rows

    def numbered_seats(self, rng, ch, d, cycle, state, chamber, base, state_pop, turnout, next_inc):
        """Each position of the district a single-member contest of its own, with its own sitting
        member and noise; every voter of the district votes in both."""
        rows = []
        for position in d.positions:
            key = f"{d.code}/{position}"
            years = cycle - ch.plan.first_cycle
            pop = state_pop * d.pop_share * np.exp(d.drift * years / 10.0)
            votes_cast = int(round(pop * ADULT_SHARE * turnout * d.turnout_factor * np.exp(rng.normal(0.0, 0.03))))
            sitting = [m for m in ch.incumbents.get(key, []) if rng.random() >= RETIRE[chamber]]
            inc_party = sitting[0][0] if sitting else ""
            inc = INCUMBENCY[chamber] * (1 if inc_party == "a" else -1 if inc_party == "b" else 0)
            expected = float(expit(base + inc))
            share = float(expit(base + inc + rng.normal(0.0, DISTRICT_NOISE[chamber])))
            lines, winners = self.single_member(rng, chamber, expected, share, votes_cast, sitting, False, False)
            rows += [(cycle, state, chamber, d.code, party, cand, votes, 1, writein, position)
                     for party, cand, votes, writein in lines]
            next_inc[key] = winners
        return rows

    def block_voting(self, rng, d, base, votes_cast, sitting):
        """Two seats by block voting: each voter has two votes, the top two candidates win. Each
        party runs two candidates, except that in a safe district the weaker party sometimes runs
        one (conceding a seat) or none."""
        share = float(expit(base + rng.normal(0.0, DISTRICT_NOISE[STATE_LOWER])))
        weaker = "a" if share < 0.5 else "b"
        margin = abs(share - 0.5)
        running = {"a": 2, "b": 2}
        if margin > 0.12 and rng.random() < 0.35:
            running[weaker] = 1 if rng.random() < 0.6 else 0
        lines = []
        for party, label, s in (("a", A_MAIN, share), ("b", B_MAIN, 1.0 - share)):
            names = [n for p, n in sitting if p == party][:running[party]]
            while len(names) < running[party]:
                names.append(self.names.new())
            spread = float(rng.uniform(0.0, 0.08))
            for name, factor in zip(names, (1 + spread, 1 - spread)):
                lines.append((label, name, int(round(votes_cast * s * factor)), 0))
        ranked = sorted(lines, key=lambda line: (-line[2], line[1]))
        winners = [("a" if label == A_MAIN else "b", name) for label, name, _, _ in ranked[:2]]
        return lines, winners

    def candidate(self, sitting, party) -> str:
        for p, name in sitting:
            if p == party:
                return name
        return self.names.new()

    def minor_lines(self, rng, chamber, uncontested) -> list[tuple[str, float]]:
        """Minor-party and write-in lines of one contest as (label, share of the votes cast)."""
        out = []
        p_minor = (0.40 if uncontested else 0.28) if chamber == FEDERAL else (0.30 if uncontested else 0.10)
        if rng.random() < p_minor:
            labels = list(MINOR_LABELS) if rng.random() < 0.15 else [MINOR_LABELS[int(rng.random() < 0.4)]]
            for label in labels:
                low, high = (0.06, 0.22) if uncontested else (0.008, 0.05)
                out.append((label, float(rng.uniform(low, high))))
        if rng.random() < (0.18 if uncontested else 0.03):
            low, high = (0.002, 0.05) if uncontested else (0.0005, 0.01)
            out.append((WRITE_IN, float(rng.uniform(low, high))))
        return out

    def single_member(self, rng, chamber, expected, share, votes_cast, sitting, contested, same_party):
        margin = abs(expected - 0.5)
        top, midpoint, width = UNCONTESTED[chamber]
        p_unc = top / (1.0 + np.exp(-(margin - midpoint) / width))
        uncontested = (not contested) and (same_party or rng.random() < p_unc)
        extra = self.minor_lines(rng, chamber, uncontested)
        lines = []
        for label, frac in extra:
            if label == WRITE_IN:
                lines.append((WRITE_IN, self.names.new(), max(1, int(round(votes_cast * frac))), 1))
            else:
                lines.append((label, self.names.new(), int(round(votes_cast * frac)), 0))
        rest = votes_cast - sum(v for _, _, v, _ in lines)
        if uncontested:
            party = "a" if expected > 0.5 else "b"
            label = A_MAIN if party == "a" else B_MAIN
            total = int(round(rest * rng.uniform(0.70, 0.85)))
            if same_party:
                first = self.candidate(sitting, "a")
                second = self.names.new()
                split = float(rng.uniform(0.52, 0.62))
                lines += [(A_MAIN, first, int(round(total * split)), 0),
                          (A_MAIN, second, total - int(round(total * split)), 0)]
                winners = [("a", first)]
            else:
                name = self.candidate(sitting, party)
                lines.append((label, name, total, 0))
                winners = [(party, name)]
            return lines, winners
        votes_a = int(round(rest * share))
        votes_b = rest - votes_a
        if votes_a == votes_b:
            votes_a += 1
        name_a, name_b = self.candidate(sitting, "a"), self.candidate(sitting, "b")
        lines += [(A_MAIN, name_a, votes_a, 0), (B_MAIN, name_b, votes_b, 0)]
        winners = [("a", name_a)] if votes_a > votes_b else [("b", name_b)]
        return lines, winners

    def multi_member(self, rng, d, base, votes_cast, sitting):
        """Two seats: each party runs two candidates; each voter has two votes; the top two win."""
        share = float(expit(base + rng.normal(0.0, DISTRICT_NOISE[STATE_LOWER])))
        lines = []
        for party, label, s in (("a", A_MAIN, share), ("b", B_MAIN, 1.0 - share)):
            names = [n for p, n in sitting if p == party][:2]
            while len(names) < 2:
                names.append(self.names.new())
            spread = float(rng.uniform(0.0, 0.06))
            lines += [(label, names[0], int(round(votes_cast * s * (1 + spread))), 0),
                      (label, names[1], int(round(votes_cast * s * (1 - spread))), 0)]
        ranked = sorted(lines, key=lambda line: (-line[2], line[1]))
        winners = [("a" if label == A_MAIN else "b", name) for label, name, _, _ in ranked[:2]]
        return lines, winners

    def fuse(self, rng, lines):
        """The fusion candidate: part of the Harbour vote is cast on the Hearth Alliance line."""
        out = []
        for label, cand, votes, writein in lines:
            if label == A_MAIN and cand == self.fusion_name:
                allied = int(round(votes * rng.uniform(0.06, 0.12)))
                out += [(A_MAIN, cand, votes - allied, 0), (A_ALLIED, cand, allied, 0)]
            else:
                out.append((label, cand, votes, writein))
        return out

    def recount(self, rng, lines):
        """The re-certified tally: one precinct's Harbour votes had been entered twice."""
        votes_a = next(v for label, _, v, _ in lines if label == A_MAIN)
        votes_b = next(v for label, _, v, _ in lines if label == B_MAIN)
        moved = (votes_a - votes_b) + int(rng.integers(300, 900))
        fixed = [(label, c, v - moved if label == A_MAIN else v, w) for label, c, v, w in lines]
        winner = next((("b", c) for label, c, _, _ in fixed if label == B_MAIN))
        return fixed, [winner]


def class_up(cycle: int, first_cycle: int) -> int:
    """The class of a staggered chamber elected in ``cycle`` under a plan first used in
    ``first_cycle``: 0 (every seat) in the plan's first cycle, then 1, 2, 1, ... alternately."""
    step = (cycle - first_cycle) // 2
    return 0 if step == 0 else 1 if step % 2 == 1 else 2


# --- output -------------------------------------------------------------------------------------
RESULT_HEADER = ("cycle", "state", "chamber", "district", "party", "candidate", "votes", "seats", "writein",
                 "position")
FEDERAL_HEADER = RESULT_HEADER[:-1]  # the federal-only files (next cycle, correction): no numbered seats
PLAN_HEADER = ("state", "chamber", "plan_id", "first_cycle", "last_cycle", "drawn_by", "note", "source")
KEY_HEADER = ("state", "chamber", "plan_id", "expected", "note", "break_cycle", "measured", "watch")


def row_key(row):
    return (row[1], row[2], row[3], row[9], -row[6], row[4], row[5])


def write_csv(path: Path, header, rows) -> None:
    path.parent.mkdir(parents=True, exist_ok=True)
    with path.open("w", encoding="utf-8", newline="") as fh:
        writer = csv.writer(fh, lineterminator="\n")
        writer.writerow(header)
        writer.writerows(rows)


def toml_text() -> str:
    def labels(party):
        return "[" + ", ".join(f'"{x}"' for x in party["labels"]) + "]"

    return f"""# levelfield.toml for the invented sample history ({FEDERATION}, 1972-2024).
# Written by sample_history/generate.py; every name here is invented.

[parties.a]
name = "{PARTY_A['name']}"
# "{A_ALLIED}" is a small allied line that cross-endorses Harbour candidates (fusion).
labels = {labels(PARTY_A)}
colour = "{PARTY_A['colour']}"    # teal

[parties.b]
name = "{PARTY_B['name']}"
labels = {labels(PARTY_B)}
colour = "{PARTY_B['colour']}"    # amber

# The minor parties ({MINOR_LABELS[0]}, {MINOR_LABELS[1]}) and "{WRITE_IN}" lines count as other.

[uncontested]
# About one seat in ten has one major party absent; under "impute" the measures give its
# winner this two-party share (a fixed 0.75/0.25 split, the fixed-share convention of the
# seats-votes literature, e.g. Gelman & King 1994, AJPS 38:514-554; from memory).
policy = "impute"
winner_share = 0.75

[multi_member]
# The state houses of {' and '.join(BLOCK_VOTING)} elect two members per district by block voting (and HH
# one district); by default such contests are left out of the district-share measures and the
# coverage says so. "pseudo_districts" brings them in, each seat a pseudo-district (a project
# choice with no verified source; stored with every number as part of the policy).
treatment = "leave_out"

[staggered]
# The state senates ({STATE_UPPER}) elect half their seats each cycle (two classes, every seat in
# the first cycle of a plan). Each cycle's unit is partial and never flagged; {STATE_UPPER}_whole
# combines the latest election of every seat (the last two cycles of the same plan).
classes.{STATE_UPPER} = {CLASSES}

[states]
# The invented states' names, shown on the pages beside their codes.
""" + "".join(f'{code} = "{name}"\n' for code, name, *_ in STATES)


def answer_key_rows(plans: list[Plan]) -> list[tuple]:
    rows = []
    for p in plans:
        s = p.spec
        if s.expected:
            rows.append((p.state, p.chamber, p.plan_id, s.expected, s.note,
                         "" if s.break_cycle is None else s.break_cycle, s.measured, s.watch))
    return sorted(rows, key=lambda r: (r[0], r[1], r[2]))


def generate(seed: int, out: Path) -> list[Path]:
    """Write every file of the sample into ``out``; return the paths written."""
    history = History(seed)
    written = []
    for cycle in CYCLES:
        rows = sorted(history.simulate(cycle), key=row_key)
        path = out / "results" / f"{cycle}.csv"
        write_csv(path, RESULT_HEADER, rows)
        written.append(path)
        if cycle == CORRECTION[2]:
            fixed = sorted(history.correction_rows, key=row_key)
            path = out / "corrections" / f"{cycle}_{CORRECTION[0]}_{CORRECTION[1]}.csv"
            write_csv(path, FEDERAL_HEADER + ("status",), [r[:-1] + ("certified",) for r in fixed])
            written.append(path)
    rows = sorted(history.simulate(NEXT_CYCLE, chambers=(FEDERAL,)), key=row_key)
    path = out / "next" / f"{NEXT_CYCLE}.csv"
    write_csv(path, FEDERAL_HEADER + ("status",), [r[:-1] + ("unofficial",) for r in rows])
    written.append(path)

    plan_rows = sorted(((p.state, p.chamber, p.plan_id, p.first_cycle, p.last_cycle, p.spec.drawn_by,
                         p.spec.note, SOURCE) for p in history.plans), key=lambda r: (r[0], r[1], r[3]))
    path = out / "plans.csv"
    write_csv(path, PLAN_HEADER, plan_rows)
    written.append(path)
    path = out / "answer_key.csv"
    write_csv(path, KEY_HEADER, answer_key_rows(history.plans))
    written.append(path)
    path = out / "levelfield.toml"
    path.write_text(toml_text(), encoding="utf-8", newline="\n")
    written.append(path)
    return written


def main(argv=None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--seed", type=int, default=DEFAULT_SEED, help=f"noise seed (default {DEFAULT_SEED})")
    parser.add_argument("--out", type=Path, default=HERE, help="output folder (default: this folder)")
    args = parser.parse_args(argv)
    written = generate(args.seed, args.out)
    print(f"wrote {len(written)} files to {args.out}")
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
