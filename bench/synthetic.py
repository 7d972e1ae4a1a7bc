"""A deterministic, invented national-scale election history for the benchmarks.

The federation is our own: state codes from letters no real jurisdiction uses as a two-letter
code, invented party labels, numbered candidates. At scale 1 it has 50 states, a federal lower
chamber of 435 seats, state lower chambers of 5,400 seats and state upper chambers of 1,950
seats in total, elected every two years over 27 cycles (1972-2024): 27 x 7,785 = 210,195
regular contests, plus a few special elections; one more cycle (2026) is written as the "new
cycle" the incremental benchmark loads. ``scale`` multiplies the number of states and every
chamber total (0.25 -> 12 states, 2 -> 100 states), so the growth curve keeps the shape of each
state.

The contest mix is meant to look like real results, not to be analysed:

* district two-party shares from a national swing per cycle, a drifting state lean, a district
  lean fixed within each plan era (a new plan from every cycle ending in 2) and per-cycle noise;
  about one plan in six is drawn to favour one party (packed and cracked districts);
* turnout per district varies with the chamber, the district and midterm years;
* safe seats are often uncontested (more often in state chambers), sometimes with a write-in
  line; minor parties stand in about a third of contests; a few fusion candidates (the party-a
  candidate also on a minor line mapped to party a, or on a minor line counted as other);
  a few same-party contests; a few two-member districts in two states' lower chambers; a few
  special elections.

Everything is drawn from one ``numpy.random.Generator`` per (state, chamber) seeded from the
master seed and the state's index, so the output is byte-identical for the same arguments.
Files: one native long CSV per cycle (``results_<cycle>.csv``) and ``levelfield.toml``
(the invented parties' labels).
"""

from __future__ import annotations

import csv
import string
from dataclasses import dataclass
from pathlib import Path

import numpy as np

#: Seats of each chamber at scale 1 (the issue's national totals).
CHAMBER_SEATS = {"federal": 435, "state_lower": 5400, "state_upper": 1950}
#: Smallest and largest chamber of one state (before scaling the totals).
CHAMBER_BOUNDS = {"federal": (1, 60), "state_lower": (40, 400), "state_upper": (20, 67)}
#: Typical two-party-plus-other turnout of a district, per chamber (votes).
CHAMBER_TURNOUT = {"federal": 260_000, "state_lower": 22_000, "state_upper": 70_000}
FIRST_CYCLE = 1972
CYCLES = 27
STATES_AT_1X = 50
SEED = 8_151_972

PARTY_A = "Tidewater"
PARTY_A_FUSION = "Tidewater-Grange"   # a second label of party a (fusion line)
PARTY_B = "Ridgeline"
MINOR = ("Lantern Union", "Fieldwork Party", "Commons Alliance")
WRITEIN_LABEL = "Write-in"

CONFIG_TOML = f"""\
# Invented federation for the benchmarks (bench/synthetic.py).
[parties.a]
name = "Tidewater Party"
labels = ["{PARTY_A}", "{PARTY_A_FUSION}"]
colour = "#2a6f97"

[parties.b]
name = "Ridgeline League"
labels = ["{PARTY_B}"]
colour = "#b5651d"
"""

_TAG = {"federal": "F", "state_lower": "L", "state_upper": "U"}

HEADER = ["cycle", "state", "chamber", "district", "party", "candidate", "votes",
          "seats", "special", "writein", "status"]

# Two-letter codes used by no real state, province, territory or country (ISO 3166-1 alpha-2
# codes and the usual postal codes are left out).
_TAKEN = {"QA", "QC", "ZA", "ZM", "ZW", "JE", "JM", "JO", "JP", "YE", "YT", "XK"}
STATE_CODES = [a + b for a in "QXZJY" for b in string.ascii_uppercase if a + b not in _TAKEN and a != b]


@dataclass(frozen=True)
class Federation:
    """The invented federation at one scale: states and the seats of each of their chambers."""

    scale: float
    states: list[str]
    seats: dict[str, np.ndarray]   # chamber -> seats per state (aligned with ``states``)
    cycles: list[int]

    @property
    def contests_per_cycle(self) -> int:
        return int(sum(int(s.sum()) for s in self.seats.values()))


def _apportion(weights: np.ndarray, total: int, low: int, high: int) -> np.ndarray:
    """Integer seats proportional to ``weights`` summing to ``total``, each within [low, high]
    when the total allows it (largest remainders)."""
    n = weights.size
    low = min(low, total // n) if n else low
    seats = np.full(n, low, dtype=np.int64)
    left = total - seats.sum()
    w = weights / weights.sum()
    for _ in range(50):
        if left <= 0:
            break
        room = np.maximum(high - seats, 0)
        if room.sum() == 0:
            room = np.ones(n, np.int64) * left  # the bounds cannot hold the total: relax them
        share = w * (room > 0)
        quota = share / share.sum() * left
        add = np.minimum(np.floor(quota).astype(np.int64), room)
        if add.sum() == 0:
            order = np.argsort(-(quota - np.floor(quota)) - (room > 0))
            add = np.zeros(n, np.int64)
            add[order[:left]] = 1
            add = np.minimum(add, np.maximum(room, 1))
        seats += add
        left = total - seats.sum()
    return seats


def federation(scale: float = 1.0, cycles: int = CYCLES, states: int | None = None) -> Federation:
    """The federation at ``scale`` (``states`` overrides the number of states, for tiny tests)."""
    if scale <= 0:
        raise ValueError("scale must be positive")
    n = states if states is not None else max(1, int(round(STATES_AT_1X * scale)))
    if n > len(STATE_CODES):
        raise ValueError(f"at most {len(STATE_CODES)} states")
    rng = np.random.default_rng([SEED, n])
    population = rng.lognormal(0.0, 0.85, n)   # one size per state, shared by its chambers
    per_state = n / STATES_AT_1X if states is not None else scale
    seats = {}
    for chamber, total in CHAMBER_SEATS.items():
        lo, hi = CHAMBER_BOUNDS[chamber]
        want = max(n * lo, int(round(total * per_state)))
        if chamber == "federal":
            w = population
        else:  # legislature size grows slowly with population
            w = population**0.35 * rng.lognormal(0.0, 0.35, n)
        seats[chamber] = _apportion(w, want, lo, hi)
    return Federation(scale, STATE_CODES[:n], seats, [FIRST_CYCLE + 2 * i for i in range(cycles)])


def _plan_eras(cycles: list[int]) -> list[list[int]]:
    """Cycle indexes of each plan era: a new plan from every cycle ending in 2."""
    eras: list[list[int]] = []
    for i, c in enumerate(cycles):
        if not eras or c % 10 == 2:
            eras.append([])
        eras[-1].append(i)
    return eras


def _gerrymander(lean: np.ndarray, favour: int, rng: np.random.Generator) -> np.ndarray:
    """Pack about a quarter of the disfavoured party's voters into lopsided districts and
    spread the rest thinly, keeping the mean lean (``favour`` +1 for a, -1 for b)."""
    n = lean.size
    if n < 4:
        return lean
    mean = lean.mean()
    k = max(1, int(round(n * rng.uniform(0.2, 0.35))))
    packed = -favour * rng.uniform(0.22, 0.32, k)
    rest = n - k
    cracked = favour * rng.uniform(0.04, 0.1, rest)
    out = np.concatenate([packed, cracked])
    out += mean - out.mean()
    rng.shuffle(out)
    return out


def _unit_rows(rng, cycle, midterm, state, chamber, shares, turnout, two_member, specials):
    """Rows of one (cycle, state, chamber) unit."""
    rows = []
    n = shares.size
    fed = chamber == "federal"
    p_unc_base = 0.45 if not fed else 0.25
    u = rng.random((n, 8))
    for i in range(n):
        district = "AL" if n == 1 else f"{i + 1:03d}"
        x = float(shares[i])
        total = int(turnout[i])
        seats = 2 if two_member[i] else 1
        tag = f"{state}{_TAG[chamber]}{cycle % 100:02d}-{i + 1}"
        # minor parties and write-ins take a slice of the vote
        minor_share = 0.0
        lines = []
        if u[i, 0] < 0.33:
            m = MINOR[int(u[i, 1] * len(MINOR))]
            ms = 0.01 + 0.07 * u[i, 2]
            minor_share += ms
            lines.append((m, f"Minor {tag}", ms, 0))
        safe = abs(x - 0.5)
        p_unc = np.clip((safe - 0.12) * 3.0, 0.0, p_unc_base)
        major_votes = total * (1.0 - minor_share)
        if u[i, 3] < p_unc:
            # uncontested: the stronger party alone, sometimes a write-in line
            party = PARTY_A if x > 0.5 else PARTY_B
            rows_major = [(party, f"{'A' if x > 0.5 else 'B'} {tag}", 1.0)]
            if u[i, 4] < 0.4:
                lines.append((WRITEIN_LABEL, "Write-ins", 0.002 + 0.01 * u[i, 5], 1))
        elif u[i, 4] < 0.006 and not fed:
            # same-party contest (two candidates of the stronger party)
            party = PARTY_A if x > 0.5 else PARTY_B
            rows_major = [(party, f"{party[0]} {tag}", 0.55 + 0.1 * u[i, 5]),
                          (party, f"{party[0]}2 {tag}", 0.45 - 0.1 * u[i, 5])]
        else:
            rows_major = [(PARTY_A, f"A {tag}", x), (PARTY_B, f"B {tag}", 1.0 - x)]
            if seats == 2:
                rows_major += [(PARTY_A, f"A2 {tag}", x * 0.97), (PARTY_B, f"B2 {tag}", (1.0 - x) * 0.97)]
        for party, cand, share in rows_major:
            votes = int(round(major_votes * share * (0.5 if seats == 2 else 1.0)))
            if party == PARTY_A and u[i, 6] < 0.03 and seats == 1:
                # fusion: the same candidate also on a second line
                fusion = PARTY_A_FUSION if u[i, 7] < 0.5 else MINOR[0]
                extra = int(votes * 0.08)
                rows.append([cycle, state, chamber, district, fusion, cand, extra, seats, 0, 0, "certified"])
                votes -= extra
            rows.append([cycle, state, chamber, district, party, cand, max(votes, 1), seats, 0, 0, "certified"])
        for party, cand, share, writein in lines:
            rows.append([cycle, state, chamber, district, party, cand, max(1, int(round(total * share))),
                         seats, 0, writein, "certified"])
    for i in specials:
        district = f"{i + 1:03d}" if n > 1 else "AL"
        x = float(np.clip(shares[i] + rng.normal(0, 0.04), 0.05, 0.95))
        total = int(turnout[i] * 0.4)
        tag = f"{state}{_TAG[chamber]}{cycle % 100:02d}-{i + 1}s"
        rows.append([cycle, state, chamber, district, PARTY_A, f"A {tag}", int(total * x), 1, 1, 0, "certified"])
        rows.append([cycle, state, chamber, district, PARTY_B, f"B {tag}", int(total * (1 - x)), 1, 1, 0, "certified"])
    return rows


def generate(out_dir: Path, scale: float = 1.0, *, cycles: int = CYCLES, new_cycles: int = 1,
             states: int | None = None) -> dict:
    """Write the history at ``scale`` into ``out_dir``; return a summary (files, rows, contests).

    ``cycles`` cycles of history, then ``new_cycles`` more files that play the results arriving
    after it (the incremental benchmark loads the first of them). ``contests`` and ``rows``
    count the history only. Deterministic: the same arguments give byte-identical files.
    """
    out_dir = Path(out_dir)
    out_dir.mkdir(parents=True, exist_ok=True)
    fed = federation(scale, cycles + new_cycles, states)
    ncyc = len(fed.cycles)
    master = np.random.default_rng([SEED, len(fed.states), 1])
    swing = master.normal(0.0, 0.03, ncyc)           # national swing toward a per cycle
    by_cycle: list[list[list]] = [[] for _ in range(ncyc)]
    contests = specials_total = 0
    eras = _plan_eras(fed.cycles)
    for s_idx, state in enumerate(fed.states):
        srng = np.random.default_rng([SEED, s_idx, 7])
        lean = srng.normal(0.0, 0.06) + np.cumsum(srng.normal(0.0, 0.01, ncyc))
        for c_idx, chamber in enumerate(CHAMBER_SEATS):
            n = int(fed.seats[chamber][s_idx])
            rng = np.random.default_rng([SEED, s_idx, c_idx, 11])
            spread = 0.08 if chamber == "federal" else 0.12
            two_member = np.zeros(n, bool)
            if chamber == "state_lower" and s_idx in (3, 17):
                two_member[: max(1, n // 10)] = True
            base_turnout = CHAMBER_TURNOUT[chamber] * rng.lognormal(0.0, 0.15)
            district_turnout = rng.lognormal(0.0, 0.25, n)
            for era in eras:
                d_lean = rng.normal(0.0, spread, n)
                if n >= 4 and rng.random() < 1 / 6:
                    d_lean = _gerrymander(d_lean, 1 if rng.random() < 0.5 else -1, rng)
                for t in era:
                    cycle = fed.cycles[t]
                    midterm = cycle % 4 == 2
                    x = 0.5 + lean[t] + swing[t] + d_lean + rng.normal(0.0, 0.025, n)
                    x = np.clip(x, 0.04, 0.96)
                    turnout = base_turnout * district_turnout * (0.7 if midterm else 1.0) * \
                        rng.lognormal(0.0, 0.05, n)
                    turnout = np.maximum(turnout, 500).astype(np.int64)
                    specials = np.flatnonzero(rng.random(n) < (0.004 if chamber != "federal" else 0.01))
                    by_cycle[t].extend(_unit_rows(rng, cycle, midterm, state, chamber, x, turnout,
                                                  two_member, specials))
                    if t < cycles:
                        contests += n
                        specials_total += specials.size
    files = []
    rows_total = 0
    for t, rows in enumerate(by_cycle):
        path = out_dir / f"results_{fed.cycles[t]}.csv"
        with path.open("w", newline="", encoding="utf-8") as fh:
            w = csv.writer(fh, lineterminator="\n")
            w.writerow(HEADER)
            w.writerows(rows)
        files.append(path)
        if t < cycles:
            rows_total += len(rows)
    (out_dir / "levelfield.toml").write_text(CONFIG_TOML, encoding="utf-8")
    return {
        "scale": scale,
        "states": len(fed.states),
        "cycles": cycles,
        "new_cycles": new_cycles,
        "seats": {k: int(v.sum()) for k, v in fed.seats.items()},
        "contests": contests,
        "special_contests": specials_total,
        "rows": rows_total,
        "files": [str(p) for p in files],
        "bytes": sum(p.stat().st_size for p in files),
    }


if __name__ == "__main__":  # pragma: no cover - manual use: python -m bench.synthetic DIR [SCALE]
    import json
    import sys

    summary = generate(Path(sys.argv[1]), float(sys.argv[2]) if len(sys.argv) > 2 else 1.0)
    summary.pop("files")
    print(json.dumps(summary, indent=2))
