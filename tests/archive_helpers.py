"""Helpers for the tests that load archive-shaped files through README's mapping: the mapping
is read from README itself (the docs are held to the code), and what enters the measures is
read through the same path as ``levelfield compute``.

Every file these tests write is invented (states, parties, names, counts)."""

from __future__ import annotations

import re
from pathlib import Path

from conftest import csv_text

README = Path(__file__).resolve().parent.parent / "README.md"

ARCHIVE_HEADER = ["year", "state", "state_po", "district", "stage", "runoff", "special", "candidate", "party",
                  "writein", "mode", "candidatevotes", "totalvotes", "unofficial", "fusion_ticket"]
H, M = "HEARTHSIDE", "MERIDIAN"


def readme_toml(first_line: str) -> str:
    """The ```toml block of README whose first line is ``first_line`` (such as ``# archive.toml``)."""
    text = README.read_text(encoding="utf-8")
    for block in re.findall(r"```toml\n(.*?)```", text, flags=re.S):
        if block.splitlines()[0].strip() == first_line:
            return block
    raise AssertionError(f"README has no toml block starting with {first_line!r}")


def archive_mapping() -> str:
    return readme_toml("# archive.toml")


def line(year, st, district, candidate, party, votes, *, stage="GEN", runoff="NA", special="FALSE",
         mode="TOTAL", unofficial="FALSE", writein=None) -> list:
    """One archive row (totalvotes is not read by the mapping: left at 0)."""
    writein = writein or ("TRUE" if candidate == "WRITEIN" else "FALSE")
    return [year, f"STATE {st}", st, district, stage, runoff, special, candidate, party, writein, mode, votes, 0,
            unofficial, "FALSE"]


def archive_csv(rows: list[list]) -> str:
    return csv_text(ARCHIVE_HEADER, rows)


def load_archive(lf, rows: list[list], *args, mapping: str | None = None, code: int = 0, name: str = "returns.csv"):
    """Load ``rows`` (archive rows) through README's archive mapping (or ``mapping``)."""
    data = lf.write(name, archive_csv(rows))
    toml = lf.write("archive.toml", mapping if mapping is not None else archive_mapping())
    return lf("load", data, "--mapping", toml, *args, code=code)


def contests(lf) -> list[tuple]:
    """Every current contest: (cycle, state, district, special, runoff, decides, placeholder, status)."""
    return lf.rows("SELECT cycle, state, district, special, runoff, decides, placeholder, status "
                   "FROM current_contests ORDER BY cycle, state, district, special, runoff")


def measured(lf, policy: str | None = None) -> dict[tuple, list[tuple]]:
    """What enters the measures, per unit: [(district, votes_a, votes_b, uncontested)], read
    through :func:`monitor.inputs.measure_inputs` as ``levelfield compute`` does."""
    from monitor.inputs import measure_inputs, reduced_contests
    from monitor.pipeline import prepare
    from monitor.workspace import Workspace

    if policy is not None:
        lf.configure(f"[uncontested]\npolicy = \"{policy}\"\n")
    ws = Workspace(lf.root)
    db = ws.open_store()
    try:
        prepare(db, ws.config())  # the stored reductions follow the policy, as before every compute
        arrays = measure_inputs(reduced_contests(db), ws.config())
    finally:
        db.close()
    out: dict[tuple, list[tuple]] = {}
    for i, unit in arrays.units.iterrows():
        key = (int(unit["cycle"]), unit["state"], unit["chamber"])
        take = arrays.unit == i
        out[key] = [(d, float(a), float(b), bool(u)) for d, a, b, u in
                    zip(arrays.district[take], arrays.votes_a[take], arrays.votes_b[take], arrays.uncontested[take])]
    return out
