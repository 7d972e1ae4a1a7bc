"""The invented sample history (sample_history/): determinism, the facts its README and answer key
state, and that every file loads through ``levelfield load``.

These are checks of the demo data against its own specification (the answer key and the issue),
not check values for the measures: whether the measures and flags find the engineered cases is
tested with the flags, against ``answer_key.csv``.
"""

from __future__ import annotations

import csv
import importlib.util
import shutil
import subprocess
import sys
import tomllib
from collections import Counter, defaultdict
from pathlib import Path

import numpy as np
import pandas as pd
import pytest

ROOT = Path(__file__).resolve().parents[1]
SAMPLE = ROOT / "sample_history"
GENERATOR = SAMPLE / "generate.py"
LEVELFIELD = Path(sys.executable).with_name("levelfield")  # the console script of this venv
HAND_WRITTEN = {"README.md", "generate.py"}

# Real US state, district and territory postal codes: no invented state may use one.
US_POSTAL = set(
    "AL AK AZ AR CA CO CT DE FL GA HI ID IL IN IA KS KY LA ME MD MA MI MN MS MO MT NE NV NH NJ NM NY "
    "NC ND OH OK OR PA RI SC SD TN TX UT VT VA WA WV WI WY DC AS GU MP PR VI UM FM MH PW AA AE AP".split()
)


def _load_generator():
    spec = importlib.util.spec_from_file_location("sample_history_generate", GENERATOR)
    module = importlib.util.module_from_spec(spec)
    sys.modules[spec.name] = module  # dataclasses look their module up here
    writes, sys.dont_write_bytecode = sys.dont_write_bytecode, True  # no __pycache__ in sample_history/
    try:
        spec.loader.exec_module(module)
    finally:
        sys.dont_write_bytecode = writes
    return module


gen = _load_generator()


def _generated_files(folder: Path) -> dict[str, bytes]:
    return {str(p.relative_to(folder)): p.read_bytes() for p in sorted(folder.rglob("*"))
            if p.is_file() and p.name not in HAND_WRITTEN and "__pycache__" not in p.parts}


def _run_generator(out: Path, *extra: str) -> None:
    subprocess.run([sys.executable, str(GENERATOR), "--out", str(out), *extra], check=True,
                   capture_output=True, text=True)


def _read(path: Path) -> pd.DataFrame:
    return pd.read_csv(path, dtype={"district": str, "candidate": str, "party": str, "state": str, "position": str},
                       keep_default_na=False)


@pytest.fixture(scope="module")
def results() -> pd.DataFrame:
    frame = pd.concat([_read(p) for p in sorted((SAMPLE / "results").glob("*.csv"))], ignore_index=True)
    config = tomllib.loads((SAMPLE / "levelfield.toml").read_text(encoding="utf-8"))
    code = {label: "a" for label in config["parties"]["a"]["labels"]}
    code.update({label: "b" for label in config["parties"]["b"]["labels"]})
    frame["code"] = frame["party"].map(code).fillna("other")
    return frame


@pytest.fixture(scope="module")
def contests(results) -> pd.DataFrame:
    """One row per contest (a numbered seat is a contest of its own): votes of a and b, seats,
    candidates per major party."""
    keys = ["cycle", "state", "chamber", "district", "position"]
    frame = results.assign(va=results.votes.where(results.code == "a", 0),
                           vb=results.votes.where(results.code == "b", 0))
    out = frame.groupby(keys).agg(va=("va", "sum"), vb=("vb", "sum"), seats=("seats", "first"),
                                  votes=("votes", "sum"))
    for code in ("a", "b"):
        cands = frame[frame.code == code].groupby(keys).candidate.nunique()
        out[f"cands_{code}"] = cands.reindex(out.index, fill_value=0)
    return out.reset_index()


@pytest.fixture(scope="module")
def plans() -> pd.DataFrame:
    return _read(SAMPLE / "plans.csv")


@pytest.fixture(scope="module")
def key() -> pd.DataFrame:
    return _read(SAMPLE / "answer_key.csv")


# --- determinism -------------------------------------------------------------------------------
def test_same_seed_gives_byte_identical_files_equal_to_the_committed_ones(tmp_path):
    first, second = tmp_path / "first", tmp_path / "second"
    _run_generator(first)
    _run_generator(second, "--seed", str(gen.DEFAULT_SEED))
    one, two = _generated_files(first), _generated_files(second)
    assert len(one) == 27 + 5  # 27 cycles, plans, answer key, toml, next cycle, one correction
    assert one == two
    committed = _generated_files(SAMPLE)
    assert sorted(committed) == sorted(one), "committed sample has missing or stale files"
    stale = [name for name in one if committed[name] != one[name]]
    assert not stale, f"committed files differ from generate.py output: {stale[:5]} (re-run generate.py)"
    assert all(b"\r" not in data for data in one.values())


def test_another_seed_changes_the_votes_but_not_the_scenario(tmp_path):
    _run_generator(tmp_path, "--seed", "7")
    other, base = _generated_files(tmp_path), _generated_files(SAMPLE)
    for name in ("plans.csv", "answer_key.csv", "levelfield.toml"):
        assert other[name] == base[name]
    assert other["results/1994.csv"] != base["results/1994.csv"]


# --- seats and plans ---------------------------------------------------------------------------
def test_federal_seats_fixed_within_each_decade_and_summing_to_the_total(contests):
    fed = contests[contests.chamber == gen.FEDERAL]
    per_state = fed.groupby(["cycle", "state"]).seats.sum().unstack(fill_value=0)
    assert list(per_state.index) == list(gen.CYCLES)
    assert sorted(per_state.columns) == sorted(gen.STATE_CODES)
    assert (per_state.sum(axis=1) == gen.FEDERAL_SEATS).all()
    decade = np.array([gen.census_of(c) for c in per_state.index])
    for census in gen.CENSUSES:
        block = per_state[decade == census]
        assert (block.nunique() == 1).all(), f"seat counts change inside the {census}s"
    first, last = per_state.iloc[0], per_state.iloc[-1]
    assert (last > first).sum() >= 3 and (last < first).sum() >= 3  # states gain and lose seats
    assert 2 <= (last == 1).sum() <= 6  # a few at-large states


def test_at_large_code_only_in_single_seat_states(contests):
    fed = contests[contests.chamber == gen.FEDERAL]
    size = fed.groupby(["cycle", "state"]).district.transform("size")
    assert ((fed.district == "AL") == (size == 1)).all()
    assert (fed.district == "AL").any()


def test_state_houses(contests):
    houses = contests[contests.chamber == gen.STATE_LOWER]
    assert houses.state.nunique() == 11
    seats = houses.groupby(["cycle", "state"]).seats.sum()
    assert seats.between(40, 121).all()
    assert (seats.groupby(level="state").nunique() == 1).all()
    # two houses of two-member districts (block voting), one of two numbered seats per district
    districts = houses.groupby(["state", "district"]).agg(seats=("seats", "max"), positions=("position", "nunique"))
    by_state = districts.groupby(level="state").agg(seats=("seats", "min"), positions=("positions", "min"))
    assert sorted(by_state.index[by_state.seats == 2]) == sorted(gen.BLOCK_VOTING)
    assert sorted(by_state.index[by_state.positions == 2]) == sorted(gen.NUMBERED_SEATS)
    assert (houses[houses.position != ""].seats == 1).all()
    assert set(houses.position) == {"", *gen.POSITIONS}


def test_block_voting_houses_split_seats_and_concede_some(contests):
    """In the two-member districts the parties sometimes split the seats, and in safe districts the
    weaker party sometimes runs one candidate (conceding a seat) or none."""
    block = contests[(contests.chamber == gen.STATE_LOWER) & contests.state.isin(list(gen.BLOCK_VOTING))]
    assert (block.seats == 2).all()
    assert ((block.cands_a == 2) & (block.cands_b == 2)).mean() > 0.7
    assert ((block.cands_a == 1) | (block.cands_b == 1)).sum() >= 50
    assert ((block.cands_a == 0) | (block.cands_b == 0)).sum() >= 20


def test_state_senates_are_staggered_in_two_classes(results, plans):
    """Every seat in the first cycle of a plan, then the odd-numbered and the even-numbered
    districts alternately: the last two cycles of a plan elect every seat once."""
    senates = results[results.chamber == gen.STATE_UPPER]
    assert sorted(senates.state.unique()) == sorted(gen.STATE_UPPER_SIZES)
    elected = senates.groupby(["state", "cycle"]).district.unique()
    upper = plans[plans.chamber == gen.STATE_UPPER]
    for (state, cycle), codes in elected.items():
        plan = upper[(upper.state == state) & (upper.first_cycle <= cycle) & (cycle <= upper.last_cycle)].iloc[0]
        size = gen.STATE_UPPER_SIZES[state]
        numbers = sorted(int(c) for c in codes)
        if cycle == plan.first_cycle:
            assert numbers == list(range(1, size + 1)), (state, cycle)
        else:
            parity = 1 if (cycle - plan.first_cycle) % 4 == 2 else 0
            assert numbers == [n for n in range(1, size + 1) if n % 2 == parity], (state, cycle)


def test_every_unit_has_exactly_one_plan_in_force(contests, plans):
    assert set(plans.drawn_by) <= {"party_a", "party_b", "split", "commission", "court", "other"}
    assert plans.plan_id.is_unique
    units = contests[["cycle", "state", "chamber"]].drop_duplicates()
    merged = units.merge(plans, on=["state", "chamber"])
    covering = merged[(merged.first_cycle <= merged.cycle) & (merged.cycle <= merged.last_cycle)]
    count = covering.groupby(["cycle", "state", "chamber"]).size()
    assert len(count) == len(units) and (count == 1).all()


def test_a_new_plan_after_every_census_plus_mid_decade_redraws(plans):
    starts = plans.groupby(["state", "chamber"]).first_cycle.apply(set)
    for (state, chamber), firsts in starts.items():
        assert {c + 2 for c in gen.CENSUSES} <= firsts, (state, chamber)
    mid = plans[plans.first_cycle % 10 != 2]
    assert len(mid[mid.drawn_by != "court"]) >= 2
    court = plans[plans.drawn_by == "court"]
    assert len(court) == 1 and court.first_cycle.iloc[0] % 10 != 2  # the remedial plan, mid-decade


# --- the answer key ----------------------------------------------------------------------------
def test_answer_key_columns_and_plans(key, plans):
    assert list(key.columns[:5]) == ["state", "chamber", "plan_id", "expected", "note"]
    assert set(key.expected) == {"favours_a", "favours_b", "neutral"}
    assert set(key.measured) <= {"", "favours_a", "favours_b", "neutral"}
    joined = key.merge(plans, on="plan_id", suffixes=("", "_plan"), validate="one_to_one")
    assert len(joined) == len(key)
    assert (joined.state == joined.state_plan).all() and (joined.chamber == joined.chamber_plan).all()
    counts = Counter(key.expected)
    assert counts["favours_a"] >= 3 and counts["favours_b"] >= 3
    assert (joined[joined.expected == "favours_a"].drawn_by == "party_a").all()
    assert (joined[joined.expected == "favours_b"].drawn_by == "party_b").all()
    assert (joined.drawn_by == "commission").sum() >= 3
    assert (plans[plans.drawn_by == "commission"].plan_id.isin(key.plan_id)).all()


def test_answer_key_watch_column(key, plans):
    """``watch`` (last column) is what the watch list must show: the drawer's direction for a
    gerrymander, nothing for commission, court and incumbent-protection plans, and for a neutral
    plan whose measures show asymmetry (the clustered cities) the direction they show."""
    assert key.columns[-1] == "watch"
    assert set(key.watch) <= {"", "a", "b"}
    joined = key.merge(plans[["plan_id", "drawn_by"]], on="plan_id", validate="one_to_one")
    engineered = joined[joined.expected != "neutral"]
    assert (engineered.watch == engineered.expected.str[-1]).all()
    kept_off = joined[joined.drawn_by.isin(["commission", "court"]) | joined.note.str.startswith("incumbent protection")]
    assert len(kept_off) >= 5 and (kept_off.watch == "").all()
    shown = joined[(joined.expected == "neutral") & (joined.watch != "")]
    assert len(shown) >= 1 and (shown.watch == shown.measured.str[-1]).all()
    assert (shown.drawn_by != "court").all()


def test_engineered_gerrymanders_have_enough_districts_in_every_cycle(key, plans, contests):
    sizes = contests.groupby(["cycle", "state", "chamber"]).size()
    for row in key[key.expected != "neutral"].merge(plans, on=["plan_id", "state", "chamber"]).itertuples():
        for cycle in range(row.first_cycle, min(row.last_cycle, gen.CYCLES[-1]) + 1, 2):
            assert sizes[(cycle, row.state, row.chamber)] >= 12, (row.plan_id, cycle)


def test_thin_gerrymander_breaks_in_its_wave_cycle(key, plans, contests):
    thin = key[key.break_cycle != ""]
    assert len(thin) == 1
    row = thin.merge(plans, on=["plan_id", "state", "chamber"]).iloc[0]
    wave = int(row.break_cycle)
    assert row.first_cycle < wave <= row.last_cycle
    drawer = row.expected[-1]
    unit = contests[(contests.state == row.state) & (contests.chamber == row.chamber)]
    seats_of_drawer = unit.assign(win=np.where(unit.va > unit.vb, "a", "b") == drawer) \
        .groupby("cycle").win.sum()
    before = seats_of_drawer[row.first_cycle]
    size = len(unit[unit.cycle == wave])
    assert before > size / 2 >= seats_of_drawer[wave]  # the drawer's majority is gone in the wave


def test_court_remedy_has_the_opposite_sign_and_the_clustered_state(key, plans):
    joined = key.merge(plans, on=["plan_id", "state", "chamber"])
    court = joined[joined.drawn_by == "court"]
    assert len(court) == 1
    remedy = court.iloc[0]
    earlier = joined[(joined.state == remedy.state) & (joined.chamber == remedy.chamber)
                     & (joined.last_cycle == remedy.first_cycle - 2)]
    assert len(earlier) == 1
    flipped = {"favours_a": "favours_b", "favours_b": "favours_a"}
    assert remedy.expected == "neutral" and remedy.measured == flipped[earlier.expected.iloc[0]]
    clustered = joined[(joined.expected == "neutral") & joined.measured.isin(flipped) & (joined.drawn_by != "court")]
    assert len(clustered) >= 1


def test_readme_names_every_plan_of_the_answer_key(key):
    readme = (SAMPLE / "README.md").read_text(encoding="utf-8")
    missing = [plan for plan in key.plan_id if plan not in readme]
    assert not missing


# --- contests ----------------------------------------------------------------------------------
def test_uncontested_share_near_one_in_ten(contests):
    single = contests[contests.seats == 1]
    assert single.position.isin(["", *gen.POSITIONS]).all()
    uncontested = (single.va == 0) != (single.vb == 0)
    assert 0.05 <= uncontested.mean() <= 0.15
    assert not ((single.va == 0) & (single.vb == 0)).any()  # a major party runs everywhere


def test_rows_are_loadable_contests(results, contests):
    assert (results.votes >= 0).all() and (contests.votes > 0).all()
    assert not results.duplicated(["cycle", "state", "chamber", "district", "position", "party", "candidate"]).any()
    assert (results.candidate != "").all()
    assert set(results.writein) == {0, 1}
    assert set(results[results.writein == 1].party) == {gen.WRITE_IN}


def test_multi_member_district_elects_two(results, contests):
    multi = contests[contests.seats > 1]
    assert len(multi) >= 1 and (multi.chamber == gen.STATE_LOWER).all() and (multi.seats == 2).all()
    hh = multi[multi.state == gen.MULTI_MEMBER[0]]
    assert set(hh.district) == {gen.MULTI_MEMBER[2]} and ((hh.cands_a + hh.cands_b) >= 3).all()
    assert (results[results.seats > 1].groupby(["cycle", "state", "district"]).seats.nunique() == 1).all()


def test_fusion_candidate_on_two_party_a_lines(results):
    config = tomllib.loads((SAMPLE / "levelfield.toml").read_text(encoding="utf-8"))
    labels_a = config["parties"]["a"]["labels"]
    lines = results.groupby(["cycle", "state", "chamber", "district", "position", "candidate"]).party.agg(frozenset)
    fused = lines[lines.map(len) > 1]
    assert len(fused) >= 1
    assert fused.index.get_level_values("candidate").nunique() == 1  # one fusion candidate
    assert all(parties == frozenset(labels_a[:2]) for parties in fused)


def test_same_party_general(contests):
    same = contests[((contests.cands_a >= 2) & (contests.cands_b == 0))
                    | ((contests.cands_b >= 2) & (contests.cands_a == 0))]
    assert len(same) >= 1


def test_labels_are_the_two_majors_the_minors_and_write_ins(results):
    assert set(results.party[results.code == "other"]) == set(gen.MINOR_LABELS) | {gen.WRITE_IN}
    assert (results.code == "b").any() and set(results.party[results.code == "a"]) == {gen.A_MAIN, gen.A_ALLIED}


def test_national_share_histogram_has_two_humps(contests):
    fed = contests[(contests.chamber == gen.FEDERAL) & (contests.va > 0) & (contests.vb > 0)]
    share = fed.va / (fed.va + fed.vb)
    middle = share.between(0.45, 0.55, inclusive="left").sum()
    below = share.between(0.35, 0.45, inclusive="left").sum()
    above = share.between(0.55, 0.65, inclusive="left").sum()
    assert middle < 0.75 * below and middle < 0.75 * above


def test_turnout_lower_in_midterm_years(contests):
    total = contests[contests.chamber == gen.FEDERAL].groupby("cycle").votes.sum()
    for cycle in gen.CYCLES:
        if cycle % 4 and cycle - 2 in total and cycle + 2 in total:
            assert total[cycle] < min(total[cycle - 2], total[cycle + 2]), cycle


def test_state_codes_are_invented():
    codes = list(gen.STATE_CODES)
    assert len(codes) == len(set(codes)) == 36
    assert all(len(c) == 2 and c.isalpha() and c.isupper() for c in codes)
    assert not set(codes) & US_POSTAL


# --- next cycle, correction, config, size ------------------------------------------------------
def test_next_cycle_is_one_unofficial_federal_cycle(contests):
    nxt = _read(SAMPLE / "next" / f"{gen.NEXT_CYCLE}.csv")
    assert set(nxt.cycle) == {gen.NEXT_CYCLE} and set(nxt.chamber) == {gen.FEDERAL}
    assert set(nxt.status) == {"unofficial"}
    seats = nxt.drop_duplicates(["state", "district"]).groupby("state").seats.sum()
    last = contests[(contests.cycle == gen.CYCLES[-1]) & (contests.chamber == gen.FEDERAL)]
    assert seats.to_dict() == last.groupby("state").seats.sum().to_dict()


def _winners(frame: pd.DataFrame) -> dict[str, str]:
    out = {}
    for district, rows in frame.groupby("district"):
        votes = rows.groupby("party").votes.sum()
        out[district] = votes.idxmax()
    return out


def test_correction_redelivers_one_unit_and_flips_one_seat():
    files = sorted((SAMPLE / "corrections").glob("*.csv"))
    assert len(files) == 1
    fixed = _read(files[0])
    units = fixed[["cycle", "state", "chamber"]].drop_duplicates()
    assert len(units) == 1 and set(fixed.status) == {"certified"}
    cycle, state, chamber = units.iloc[0]
    original = _read(SAMPLE / "results" / f"{cycle}.csv")
    original = original[(original.state == state) & (original.chamber == chamber)]
    assert set(original.district) == set(fixed.district)
    before, after = _winners(original), _winners(fixed)
    assert sum(before[d] != after[d] for d in before) == 1


def test_sample_config_has_the_party_contract():
    config = tomllib.loads((SAMPLE / "levelfield.toml").read_text(encoding="utf-8"))
    for code in ("a", "b"):
        party = config["parties"][code]
        assert set(party) == {"name", "labels", "colour"}
        assert party["labels"] and len(party["colour"]) == 7 and party["colour"].startswith("#")
    assert not set(config["parties"]["a"]["labels"]) & set(config["parties"]["b"]["labels"])
    assert config["uncontested"] == {"policy": "impute", "winner_share": 0.75}


def test_sample_is_under_five_megabytes():
    total = sum(p.stat().st_size for p in SAMPLE.rglob("*") if p.is_file() and "__pycache__" not in p.parts)
    assert total < 5_000_000


# --- through the loader ------------------------------------------------------------------------
def _levelfield(workspace: Path, *args: str) -> subprocess.CompletedProcess:
    return subprocess.run([str(LEVELFIELD), "--workspace", str(workspace), *args],
                          capture_output=True, text=True)


def test_every_file_loads_with_levelfield(tmp_path):
    assert LEVELFIELD.exists(), f"{LEVELFIELD} is not installed"
    workspace = tmp_path / "workspace"
    done = _levelfield(workspace, "init")
    assert done.returncode == 0, done.stderr
    shutil.copyfile(SAMPLE / "levelfield.toml", workspace / "levelfield.toml")
    batches = [sorted((SAMPLE / "results").glob("*.csv")), [SAMPLE / "next" / f"{gen.NEXT_CYCLE}.csv"],
               sorted((SAMPLE / "corrections").glob("*.csv"))]
    for files in batches:
        done = _levelfield(workspace, "load", *map(str, files))
        assert done.returncode == 0, done.stdout[-2000:] + done.stderr[-2000:]
        assert "error" not in done.stderr.casefold(), done.stderr[-2000:]
