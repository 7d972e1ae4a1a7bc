"""Coverage of every unit: how much of a state's chamber the measures see, and why not all of it.

For each unit (cycle, state, chamber) with stored results:

* **expected**: the districts and seats the unit should have, from the first source that says:
  the plans file (optional ``districts``/``seats`` of the plan era in force), else the previous
  cycle of the same plan (its stored districts and seats), else ``[coverage] expected`` in
  levelfield.toml, else unknown (said plainly);
* **stored** and **in the measures**: the districts and seats with results, and those that enter
  the measures;
* **gaps**: each district missing (in the previous cycle of the same plan, absent now; or, when
  the codes are not known, a count above what is stored) or left out, with its reason from
  :func:`monitor.eligibility.classify`, the one place that decides what enters the measures;
* **seat_coverage**: seats in the measures over the seats the unit should have (the expected
  seats, or the stored and missing seats when they are more); ``incomplete`` when any district is
  missing or left out;
* seats, not only districts: a district's numbered seats (positions) are seats of their own, a
  multi-member contest's seats are its ``seats``; a district is in the measures when all its
  seats are. The districts whose multi-member contests entered under ``[multi_member] treatment
  = "pseudo_districts"`` are counted (``districts_treated``, ``seats_treated``) and listed (gap
  ``treated``: not a gap, the treatment's mark);
* staggered chambers (:mod:`monitor.staggered`): a per-cycle unit of such a chamber is
  ``partial``; its districts and seats are expected from the whole-chamber unit of the same
  cycle, and the seats elected in an earlier cycle are listed as ``not up`` (not missing). A
  whole-chamber unit is covered like any unit (its previous cycle is the previous whole-chamber
  unit of the plan) and says which cycles it ``combines``;
* the **two vote shares** of party a: the two-party share of the votes as cast (the raw votes of
  the contests that decide the seats: what the public quotes) and the share after the
  uncontested policy (the districts in the measures, imputed votes included: what the measures
  use, equal to the measures' ``vote_share``).

Computed with the measures (``levelfield compute``) and stored in ``coverage`` and
``coverage_gaps``; the exports, the flags, ``status`` and the site read the stored rows.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import pandas as pd

from monitor import multi_member as M
from monitor.eligibility import ENTERS, classify, deciding
from monitor.reduce import two_party_inputs
from monitor.staggered import base_chamber
from store import coverage as tables

UNIT_KEYS = ["cycle", "state", "chamber"]
MISSING, LEFT_OUT, NOT_UP, TREATED = "missing", "left out", "not up", "treated"
#: the gaps that make a unit incomplete (``treated`` only marks the districts of the treatment)
GAPS = (MISSING, LEFT_OUT, NOT_UP)
UNKNOWN = "unknown"
#: how many district codes a note lists per reason before "and N more"
NOTE_CODES = 8


@dataclass
class Coverage:
    """``units``: one row per unit (the ``coverage`` columns); ``gaps``: one row per missing or
    left-out district (the ``coverage_gaps`` columns)."""

    units: pd.DataFrame
    gaps: pd.DataFrame


def unit_coverage(contests: pd.DataFrame, policy: str, winner_share: float, unit_plans: pd.DataFrame,
                  plan_counts: pd.DataFrame, declared: pd.DataFrame, *, treatment: str = M.LEAVE_OUT,
                  whole: pd.DataFrame | None = None, partial: pd.DataFrame | None = None) -> Coverage:
    """Pure step: the coverage of every unit of ``contests``.

    ``contests``: every current contest with its reduction (:func:`monitor.inputs.reduced_contests`),
    the whole-chamber units' contests included (their ``from_cycle`` set); ``unit_plans``: cycle,
    state, chamber, plan_id (the plan in force); ``plan_counts``: state, chamber, plan_id,
    districts, seats (from the plans file, null when not given); ``declared``: state, chamber,
    districts, seats (``[coverage] expected``); ``treatment``: the multi-member treatment;
    ``whole``: the whole-chamber units (unit_id, combines: :func:`monitor.staggered.whole_chambers`);
    ``partial``: the per-cycle units of staggered chambers (cycle, state, chamber)."""
    unit_cols = [c for c in tables.UNIT_COLUMNS if c not in ("policy", "computed_at")]
    if contests.empty:
        return Coverage(pd.DataFrame(columns=unit_cols), pd.DataFrame(columns=tables.GAP_COLUMNS))
    c = contests.reset_index(drop=True)
    if "position" not in c.columns:
        c = c.assign(position="")
    c["position"] = c["position"].fillna("").astype(str)
    reason = classify(c, policy, treatment).to_numpy(object)
    decides = deciding(c)
    units = (c[["unit_id", *UNIT_KEYS]].drop_duplicates("unit_id").sort_values(UNIT_KEYS, kind="mergesort")
             .reset_index(drop=True))
    n = len(units)
    u = pd.Index(units["unit_id"]).get_indexer(c["unit_id"])   # unit index of each contest
    dc, _ = pd.factorize(c["district"])                        # district code of each contest
    sc, _ = pd.factorize(c["district"].astype(str) + "\x1f" + c["position"])  # seat (district, position)
    # one row per seat: its deciding contest when one is stored, else its (special) contest
    order = np.lexsort((~decides, sc, u))
    head = np.r_[True, (u[order][1:] != u[order][:-1]) | (sc[order][1:] != sc[order][:-1])]
    first = order[head]
    multi = c["seats"].to_numpy(int)[first] > 1
    d = c.iloc[first].assign(reason=reason[first], measured=reason[first] == ENTERS,
                             seats=c["seats"].to_numpy(int)[first], u=u[first], dc=dc[first], sc=sc[first])
    d["treated"] = d["measured"].to_numpy(bool) & multi
    du, seats, measured = d["u"].to_numpy(), d["seats"].to_numpy(int), d["measured"].to_numpy(bool)
    units["seats_stored"] = np.bincount(du, seats, n).astype(np.int64)
    units["seats_measured"] = np.bincount(du, seats * measured, n).astype(np.int64)
    # a district is in the measures when every seat of it is (its numbered seats, all its members)
    per_district = d.groupby(["u", "dc"], sort=False)["measured"].all().reset_index()
    units["districts_stored"] = np.bincount(per_district["u"].to_numpy(), minlength=n)
    units["districts_measured"] = np.bincount(per_district["u"].to_numpy()[per_district["measured"].to_numpy(bool)],
                                              minlength=n)
    treated = d["treated"].to_numpy(bool)
    units["districts_treated"] = np.bincount(du[treated], minlength=n)
    units["seats_treated"] = np.bincount(du[treated], seats[treated], n).astype(np.int64)
    # votes as cast: the raw votes of the deciding contests; after the policy: the measures' inputs
    units["votes_a_cast"] = np.bincount(u[decides], c["votes_a"].to_numpy(float)[decides], n).astype(np.int64)
    units["votes_b_cast"] = np.bincount(u[decides], c["votes_b"].to_numpy(float)[decides], n).astype(np.int64)
    used = two_party_inputs(c[decides], policy, winner_share, treatment)
    uu = u[used.index.to_numpy()]
    units["votes_a_measured"] = np.bincount(uu, used["votes_a"].to_numpy(float), n)
    units["votes_b_measured"] = np.bincount(uu, used["votes_b"].to_numpy(float), n)
    units = _staggered(units, whole, partial)

    units, missing = _previous_cycle(units, d, unit_plans)
    units = _expected(units, plan_counts, declared)
    units, not_up = _not_up(units, d)
    gaps = _gaps(units, missing, d[~measured], not_up, d[treated])
    units = _summarise(units, gaps)
    return Coverage(units[unit_cols].reset_index(drop=True), gaps)


def _staggered(units: pd.DataFrame, whole: pd.DataFrame | None, partial: pd.DataFrame | None) -> pd.DataFrame:
    """``partial`` (1 for a per-cycle unit of a staggered chamber) and ``combines`` (the cycles a
    whole-chamber unit combines, ``2022+2024``) of every unit."""
    units["partial"] = 0
    units["combines"] = None
    if partial is not None and len(partial):
        keys = set(zip(partial["cycle"], partial["state"], partial["chamber"]))
        units["partial"] = [int(k in keys) for k in zip(units["cycle"], units["state"], units["chamber"])]
    if whole is not None and len(whole):
        combines = dict(zip(whole["unit_id"], whole["combines"]))
        units["combines"] = units["unit_id"].map(combines).astype(object)
        units["combines"] = units["combines"].where(units["combines"].notna(), None)
    return units


def _previous_cycle(units: pd.DataFrame, d: pd.DataFrame, unit_plans: pd.DataFrame):
    """Each unit's previous cycle under the same plan, its district and seat counts, and the
    districts it had that the unit lacks (named missing districts). ``units`` are sorted by
    cycle, state, chamber; ``d`` has one row per stored district with its unit index ``u`` and
    district code ``dc``."""
    n = len(units)
    plans = unit_plans[[*UNIT_KEYS, "plan_id"]] if len(unit_plans) else pd.DataFrame(columns=[*UNIT_KEYS, "plan_id"])
    units = units.merge(plans, on=UNIT_KEYS, how="left")
    chrono = units.sort_values(["state", "chamber", "cycle"], kind="mergesort")
    by = chrono.groupby(["state", "chamber"], sort=False)
    prev_index, prev_plan = by.cumcount(), by["plan_id"].shift(1)
    previous = np.full(n, -1)
    later = (prev_index > 0).to_numpy() & (prev_plan.notna() & (prev_plan == chrono["plan_id"])).to_numpy()
    # a partial unit's previous cycle elected another class: its districts are not missing
    later &= chrono["partial"].to_numpy(int) == 0
    rows = chrono.index.to_numpy()
    previous[rows[1:][later[1:]]] = rows[:-1][later[1:]]   # chrono's previous row is the previous cycle
    cycles = units["cycle"].to_numpy()
    units["previous_cycle"] = pd.array([cycles[p] if p >= 0 else pd.NA for p in previous], dtype="Int64")
    # each unit is the previous of at most one unit: carry the previous unit's districts over to it
    next_of = np.full(n, -1)
    next_of[previous[previous >= 0]] = np.flatnonzero(previous >= 0)
    du, dc, sc, seats = d["u"].to_numpy(), d["dc"].to_numpy(), d["sc"].to_numpy(), d["seats"].to_numpy(int)
    target = next_of[du]
    carried = target >= 0
    has = previous >= 0
    district_rows = ~pd.DataFrame({"u": du, "dc": dc}).duplicated().to_numpy()  # one row per district
    units["previous_districts"] = pd.Series(np.bincount(target[carried & district_rows], minlength=n),
                                            dtype="Int64").where(has)
    units["previous_seats"] = pd.Series(np.bincount(target[carried], seats[carried], n).astype(np.int64),
                                        dtype="Int64").where(has)
    width = int(sc.max()) + 1 if len(sc) else 1
    present = du.astype(np.int64) * width + sc
    absent = carried & ~np.isin(target.astype(np.int64) * width + sc, present)
    t = target[absent]
    missing = pd.DataFrame({"cycle": units["cycle"].to_numpy()[t], "state": units["state"].to_numpy()[t],
                            "chamber": units["chamber"].to_numpy()[t],
                            "previous_cycle": cycles[du[absent]],
                            "district": d["district"].to_numpy()[absent], "seats": seats[absent],
                            "position": d["position"].to_numpy()[absent]})
    return units, missing


def _expected(units: pd.DataFrame, plan_counts: pd.DataFrame, declared: pd.DataFrame) -> pd.DataFrame:
    """districts_expected, seats_expected and expected_from: the plans file, else the previous
    cycle of the same plan, else levelfield.toml, else unknown."""
    plan = plan_counts.rename(columns={"districts": "plan_districts", "seats": "plan_seats", "chamber": "base"})
    # a whole-chamber unit is counted against its chamber's plans file and declared counts
    units = units.assign(base=[base_chamber(ch) for ch in units["chamber"]])
    units = units.merge(plan[["state", "base", "plan_id", "plan_districts", "plan_seats"]],
                        on=["state", "base", "plan_id"], how="left")
    units = units.merge(declared.rename(columns={"districts": "declared_districts", "seats": "declared_seats",
                                                 "chamber": "base"}),
                        on=["state", "base"], how="left")
    from_plan = units["plan_districts"].notna().to_numpy()
    from_previous = ~from_plan & units["previous_districts"].notna().to_numpy()
    from_config = ~from_plan & ~from_previous & units["declared_districts"].notna().to_numpy()
    pick = lambda a, b, c: np.select([from_plan, from_previous, from_config],  # noqa: E731
                                     [units[a].astype(float), units[b].astype(float), units[c].astype(float)], np.nan)
    units["districts_expected"] = pd.array(pick("plan_districts", "previous_districts", "declared_districts"), dtype="Int64")
    units["seats_expected"] = pd.array(pick("plan_seats", "previous_seats", "declared_seats"), dtype="Int64")
    units["expected_from"] = np.select(
        [from_plan, from_previous, from_config],
        ["plans file (plan " + units["plan_id"].astype(str) + ")",
         "the " + units["previous_cycle"].astype(str) + " results of the same plan",
         pd.Series("levelfield.toml [coverage] expected", index=units.index)], UNKNOWN)
    return units


def _not_up(units: pd.DataFrame, d: pd.DataFrame) -> tuple[pd.DataFrame, pd.DataFrame]:
    """A partial unit is counted against the whole-chamber unit of its cycle: its expected
    districts and seats are that unit's, and each seat the whole-chamber unit takes from an
    earlier cycle is ``not up``."""
    cols = [*UNIT_KEYS, "district", "seats", "position", "from_cycle"]
    partial = units["partial"].to_numpy(int) == 1
    if not partial.any() or "from_cycle" not in d.columns:
        return units, pd.DataFrame(columns=cols)
    whole = units[units["combines"].notna()].assign(base=lambda f: [base_chamber(ch) for ch in f["chamber"]])
    by_key = {(cy, st, b): i for i, (cy, st, b) in enumerate(zip(whole["cycle"], whole["state"], whole["base"]))}
    for i in np.flatnonzero(partial):
        j = by_key.get((units.at[i, "cycle"], units.at[i, "state"], units.at[i, "chamber"]))
        if j is None:
            continue
        w = whole.iloc[j]
        units.at[i, "districts_expected"] = int(w["districts_stored"])
        units.at[i, "seats_expected"] = int(w["seats_stored"])
        units.at[i, "expected_from"] = f"the whole chamber ({w['chamber']} {int(w['cycle'])}: {w['combines']})"
    whole_index = pd.Index(units["unit_id"]).get_indexer(whole["unit_id"])
    rows = d[np.isin(d["u"].to_numpy(), whole_index) & (d["from_cycle"].to_numpy(float) != d["cycle"].to_numpy(float))]
    rows = rows.assign(chamber=[base_chamber(ch) for ch in rows["chamber"]])
    keys = set(zip(units.loc[partial, "cycle"], units.loc[partial, "state"], units.loc[partial, "chamber"]))
    rows = rows.loc[np.array([k in keys for k in zip(rows["cycle"], rows["state"], rows["chamber"])], dtype=bool)]
    return units, rows[cols]


def _gaps(units: pd.DataFrame, missing: pd.DataFrame, left_out: pd.DataFrame, not_up: pd.DataFrame,
          treated: pd.DataFrame) -> pd.DataFrame:
    """Every missing, left-out or not-up district of every unit, with its reason, and the
    districts that entered under the multi-member treatment."""
    rows = [missing.assign(gap=MISSING, reason=lambda m: "in the " + m["previous_cycle"].astype(str)
                           + " results of the same plan; no result stored for this cycle")]
    named = missing.groupby(UNIT_KEYS).agg(named=("district", "size"), named_seats=("seats", "sum"))
    u = units.merge(named.reset_index(), on=UNIT_KEYS, how="left").fillna({"named": 0, "named_seats": 0})
    known = u["districts_expected"].notna() & (u["partial"].to_numpy(int) == 0)  # partial: the not-up seats
    extra = (u["districts_expected"].astype(float) - u["districts_stored"] - u["named"]).where(known, 0).clip(lower=0)
    extra_seats = (u["seats_expected"].astype(float) - u["seats_stored"] - u["named_seats"]).where(known, 0).clip(lower=0)
    more = u[extra > 0].assign(extra=extra[extra > 0].astype(int), extra_seats=extra_seats[extra > 0].astype(int))
    if len(more):
        rows.append(pd.DataFrame({
            **{k: more[k].to_numpy() for k in UNIT_KEYS}, "district": "", "seats": more["extra_seats"].to_numpy(),
            "gap": MISSING, "position": "",
            "reason": [f"{n} more district{'s' if n != 1 else ''} expected ({src}) than stored; which is not known"
                       for n, src in zip(more["extra"], more["expected_from"])]}))
    rows.append(left_out[[*UNIT_KEYS, "district", "seats", "reason", "position"]].assign(gap=LEFT_OUT))
    rows.append(not_up.assign(gap=NOT_UP, reason=lambda f: [
        f"not up for election this cycle: elected in {int(x)} (another class of a staggered chamber; "
        "in the whole-chamber unit)" for x in f["from_cycle"]]))
    rows.append(treated.assign(gap=TREATED, reason=lambda f: [
        f"multi-member contest ({int(k)} seats) entered as {int(k)} pseudo-districts (multi_member.treatment = "
        "pseudo_districts: project choice, no verified source)" for k in f["seats"]]))
    gaps = pd.concat([r.assign(position=r["position"].fillna("") if "position" in r else "")[tables.GAP_COLUMNS]
                      for r in rows], ignore_index=True)
    gaps["cycle"] = gaps["cycle"].astype(int)
    gaps["seats"] = gaps["seats"].astype(int)
    kinds = {MISSING: 0, NOT_UP: 1, LEFT_OUT: 2, TREATED: 3}
    order = gaps.assign(_k=gaps["gap"].map(kinds).astype(int))
    return (order.sort_values([*UNIT_KEYS, "_k", "district", "position"], kind="mergesort")
            .drop(columns="_k").reset_index(drop=True))


def _summarise(units: pd.DataFrame, gaps: pd.DataFrame) -> pd.DataFrame:
    """seat_coverage, incomplete and the plain-words note of every unit."""
    missing = gaps[gaps["gap"] == MISSING].groupby(UNIT_KEYS)["seats"].sum()
    key = pd.MultiIndex.from_frame(units[UNIT_KEYS])
    should = np.maximum(units["seats_expected"].astype(float).fillna(0).to_numpy(),
                        units["seats_stored"].to_numpy(float) + missing.reindex(key).fillna(0).to_numpy(float))
    with np.errstate(invalid="ignore", divide="ignore"):
        units["seat_coverage"] = np.where(should > 0, units["seats_measured"].to_numpy(float) / should, np.nan)
    notes = notes_by_unit(gaps)
    units["note"] = [notes.get(k) for k in zip(units["cycle"], units["state"], units["chamber"])]
    short = gaps[gaps["gap"].isin(GAPS)]
    short = set(zip(short["cycle"], short["state"], short["chamber"]))
    units["incomplete"] = [int(k in short) for k in zip(units["cycle"], units["state"], units["chamber"])]
    return units.sort_values(UNIT_KEYS, kind="mergesort")


def notes_by_unit(gaps: pd.DataFrame) -> dict[tuple, str]:
    """What is missing and what is left out of each unit, and why, in plain words (one pass over
    the gaps): ``missing: district 7 (in the 2010 results ...); left out: districts 3, 9 (won by a
    minor party or an independent)``."""
    grouped: dict[tuple, list[str]] = {}  # (unit keys, gap, reason) -> district codes, in order
    positions = gaps["position"].fillna("").tolist() if "position" in gaps else [""] * len(gaps)
    for key, position in zip(zip(*(gaps[k].tolist() for k in (*UNIT_KEYS, "gap", "reason", "district"))), positions):
        code = f"{key[-1]} seat {position}" if position and key[-1] else key[-1]
        grouped.setdefault(key[:-1], []).append(code)
    parts: dict[tuple, dict[str, list[str]]] = {}
    for (cycle, state, chamber, gap, reason), codes in grouped.items():
        codes = [c for c in codes if c]
        if codes:
            shown = ", ".join(codes[:NOTE_CODES]) + (f" and {len(codes) - NOTE_CODES} more" if len(codes) > NOTE_CODES else "")
            text = f"district{'s' if len(codes) > 1 else ''} {shown} ({reason})"
        else:
            text = reason
        parts.setdefault((cycle, state, chamber), {}).setdefault(gap, []).append(text)
    return {key: "; ".join(f"{gap}: " + "; ".join(by_gap[gap]) for gap in (MISSING, NOT_UP, LEFT_OUT, TREATED)
                           if gap in by_gap)
            for key, by_gap in parts.items()}


# --- shares --------------------------------------------------------------------------------------
def two_party_share(a, b) -> np.ndarray:
    """a / (a + b), NaN where there is no two-party vote."""
    a, b = np.asarray(a, float), np.asarray(b, float)
    with np.errstate(invalid="ignore", divide="ignore"):
        return np.where(a + b > 0, a / (a + b), np.nan)


def with_shares(units: pd.DataFrame) -> pd.DataFrame:
    """The stored coverage rows with ``vote_share_as_cast`` and ``vote_share_after_policy``."""
    return units.assign(vote_share_as_cast=two_party_share(units["votes_a_cast"], units["votes_b_cast"]),
                        vote_share_after_policy=two_party_share(units["votes_a_measured"], units["votes_b_measured"]))


def national_shares(units: pd.DataFrame) -> pd.DataFrame:
    """Per (cycle, chamber): party a's two-party share nationwide, as cast and after the policy
    (sums of the units' votes)."""
    cols = ["cycle", "chamber", "national_vote_share_as_cast", "national_vote_share_after_policy"]
    if units.empty:
        return pd.DataFrame(columns=cols)
    s = units.groupby(["cycle", "chamber"])[["votes_a_cast", "votes_b_cast", "votes_a_measured", "votes_b_measured"]].sum()
    s = s.reset_index()
    s["national_vote_share_as_cast"] = two_party_share(s["votes_a_cast"], s["votes_b_cast"])
    s["national_vote_share_after_policy"] = two_party_share(s["votes_a_measured"], s["votes_b_measured"])
    return s[cols]


# --- in words --------------------------------------------------------------------------------------
def percent(share) -> str:
    return "unknown" if share is None or not np.isfinite(float(share)) else f"{100 * float(share):.0f}%"


def summary(row) -> str:
    """One unit's coverage in a sentence: ``11 of 12 districts in the measures (92% of the 12
    seats; 12 expected from the 2010 results of the same plan)``."""
    expected = row["districts_expected"]
    known = expected is not None and not pd.isna(expected)
    of = int(expected) if known else int(row["districts_stored"])
    seats = _seats_of(row)
    text = (f"{int(row['districts_measured'])} of {of} district{'s' if of != 1 else ''} in the measures "
            f"({int(row['seats_measured'])} of {seats} seats, {percent(row['seat_coverage'])}; ")
    if known:
        text += f"{int(expected)} districts expected from {row['expected_from']})"
    else:
        text += f"{int(row['districts_stored'])} stored, the number expected is unknown)"
    return text


def _seats_of(row) -> str:
    """The seats the coverage share is taken of (as :func:`_summarise` computes it)."""
    share, measured = row["seat_coverage"], int(row["seats_measured"])
    if share is None or pd.isna(share) or float(share) == 0:
        return str(int(row["seats_stored"]))
    return f"{measured / float(share):.0f}"


def below_minimum(units: pd.DataFrame, minimum: float) -> pd.Series:
    """True where the measures cover less than ``minimum`` of the unit's seats (never flagged)."""
    share = pd.to_numeric(units["seat_coverage"], errors="coerce").astype(float)
    return share.fillna(0.0) < minimum


def not_flagged_reason(share: float, minimum: float) -> str:
    return (f"the measures cover {percent(share)} of the seats, below flags.min_coverage "
            f"({percent(minimum)}): not flagged")


def coverage_lines(units: pd.DataFrame, minimum: float, detail: int = 0) -> list[str]:
    """The coverage in a few lines: how many units are incomplete and how many are below
    ``flags.min_coverage``; with ``detail``, that many incomplete units listed (those below the
    minimum first, then the newest cycles), each with what is missing or left out and why. The
    per-cycle units of staggered chambers are counted apart, in one line (they are never
    flagged; their whole-chamber units are counted with the others)."""
    if units.empty:
        return []
    partial = (units["partial"].fillna(0).astype(int) == 1) if "partial" in units else pd.Series(False, index=units.index)
    out = []
    if partial.any():
        halves = units[partial]
        from monitor.staggered import whole_code

        chambers = "; ".join(f"{ch} of {', '.join(sorted(part['state'].unique()))} (measured whole as {whole_code(ch)})"
                             for ch, part in halves.groupby("chamber", sort=True))
        out.append(f"staggered chambers: {int(partial.sum())} per-cycle unit(s) are partial (one class of the seats; "
                   f"never flagged, not listed below): {chambers}")
        units = units[~partial]
    low = below_minimum(units, minimum)
    incomplete = units["incomplete"].astype(int) == 1
    out.insert(0, f"coverage: {int(incomplete.sum())} of {len(units)} unit(s) incomplete (districts missing or left "
                  f"out of the measures); {int(low.sum())} cover less than {percent(minimum)} of their seats "
                  "(never flagged)")
    if detail and incomplete.any():
        # cycles of one state and chamber with the same gaps are one line
        shown = units[incomplete].assign(_low=low[incomplete].astype(int))
        groups = []
        for _, part in shown.groupby(["state", "chamber", "note"], sort=False):
            part = part.sort_values("cycle")
            groups.append((-int(part["_low"].max()), -int(part["cycle"].max()), part))
        groups.sort(key=lambda g: (g[0], g[1], g[2]["state"].iloc[0], g[2]["chamber"].iloc[0]))
        for _, _, part in groups[:detail]:
            r = part.iloc[-1]
            cycles = (str(int(r["cycle"])) if len(part) == 1 else
                      f"{len(part)} cycles {int(part['cycle'].min())}-{int(r['cycle'])}")
            flag = " [never flagged: below flags.min_coverage]" if part["_low"].any() else ""
            latest = f"; latest {int(r['cycle'])}: " if len(part) > 1 else ": "
            out.append(f"  {r['state']} {r['chamber']} {cycles}: {r['note']}{latest}{summary(r)}{flag}")
        if len(groups) > detail:
            out.append(f"  ... and {len(groups) - detail} more (levelfield export coverage --districts)")
    return out


# --- the edge: read what the coverage step (monitor/coverage_step.py) stored ---------------------------
def stored_coverage(db) -> Coverage:
    """The coverage as the last recompute stored it."""
    return Coverage(tables.read_coverage(db), tables.read_gaps(db))
