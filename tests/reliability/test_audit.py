"""Corrections and audit (issue 9, item 4): every load is kept with its provenance, a superseded
result stays retrievable, and ``levelfield status`` / ``export results`` say where each number
came from. (The site footer's provenance is checked in test_security.py with the site.)"""

from __future__ import annotations

import hashlib
import json

from conftest import long_csv

UNIT = [
    [2022, "QV", "federal", "1", "Harbour", "Maren Olvas", "1,200"],
    [2022, "QV", "federal", "1", "Upland", "Tobin Resk", 1000],
    [2022, "QV", "federal", "2", "Harbour", "Ilse Varro", 700],
    [2022, "QV", "federal", "2", "Upland", "Piet Amsel", 900],
]
OTHER = [[2022, "NR", "federal", "AL", "Harbour", "Oda Fenn", 5000], [2022, "NR", "federal", "AL", "Upland", "Lio Marsk", 4000]]


def versions():
    v1 = [r + ["unofficial"] for r in UNIT + OTHER]
    v2 = [r + ["unofficial"] for r in UNIT]
    v2[2][6] = 1100  # district 2 flips from Upland to Harbour
    v3 = [r[:] for r in v2]
    for r in v3:
        r[7] = "certified"
    v3[0][6] = "1,250"
    return v1, v2, v3


def test_every_load_is_kept_and_every_superseded_result_stays_retrievable(lf):
    v1, v2, v3 = versions()
    paths = [lf.write(f"v{i}.csv", long_csv(rows, ("status",))) for i, rows in enumerate((v1, v2, v3), 1)]
    outputs = [lf("load", p, "--source", f"returns office, release {i} 'final'; -- \"quoted\"").stdout
               for i, p in enumerate(paths, 1)]
    assert "district 2: winner b -> a" in outputs[1]
    assert "votes of party a: 1,900 -> 2,300 (+400)" in outputs[1]
    assert "status: unofficial -> certified" in outputs[2]

    # the loads table: one row per load, with what came in and what it replaced
    loads = lf.rows("SELECT id, file_name, sha256, bytes, source, rows_read, rows_accepted, rows_rejected, "
                    "units_new, units_corrected, outcome, supersedes, report FROM loads ORDER BY id")
    assert [r[0] for r in loads] == [1, 2, 3]
    for (lid, name, sha, size, source, read, accepted, rejected, new, corrected, outcome, supersedes, report), path, i in \
            zip(loads, paths, (1, 2, 3)):
        data = path.read_bytes()
        assert (name, sha, size) == (path.name, hashlib.sha256(data).hexdigest(), len(data))
        assert source == f"returns office, release {i} 'final'; -- \"quoted\""
        assert (read, accepted, rejected, outcome) == (data.count(b"\n") - 1, data.count(b"\n") - 1, 0, "loaded")
        assert json.loads(report)["load_id"] == lid
    assert [(r[8], r[9], r[11]) for r in loads] == [(2, 0, None), (0, 1, "[1]"), (0, 1, "[2]")]

    # the unit's history: three deliveries, one current, each pointing at the one it replaced
    history = lf.rows("SELECT unit_id, load_id, file_name, certification, supersedes, superseded_by, standing "
                      "FROM unit_history WHERE state = 'QV' ORDER BY unit_id")
    ids = [h[0] for h in history]
    assert [(h[1], h[2], h[3], h[6]) for h in history] == [
        (1, "v1.csv", "unofficial", "superseded"), (2, "v2.csv", "unofficial", "superseded"),
        (3, "v3.csv", "certified", "current")]
    assert [h[4] for h in history] == [None, ids[0], ids[1]]
    assert [h[5] for h in history] == [ids[1], ids[2], None]

    # superseded votes are all still there, exactly as delivered
    def delivered(unit_id):
        return sorted(lf.rows("SELECT c.district, v.party, v.candidate, v.votes FROM votes v JOIN contests c "
                              "ON c.id = v.contest_id WHERE c.unit_id = ?", [unit_id]))

    for unit_id, rows in zip(ids, (v1[:4], v2, v3)):
        assert delivered(unit_id) == sorted((r[3], r[4], r[5], int(str(r[6]).replace(",", ""))) for r in rows)

    # the current view shows only the latest delivery, each line with the load it came from
    current = lf.rows("SELECT state, district, candidate, votes, status, load_id FROM district_results ORDER BY 1, 2, 3")
    assert [r for r in current if r[0] == "QV"] == sorted(
        ("QV", r[3], r[5], int(str(r[6]).replace(",", "")), "certified", 3) for r in v3)
    assert [r[5] for r in current if r[0] == "NR"] == [1, 1]  # untouched by the QV corrections
    exported = lf.export_rows()
    assert {(r["state"], r["load_id"]) for r in exported} == {("QV", "3"), ("NR", "1")}

    # re-delivering old bytes changes nothing and says so
    before = lf.dump()
    assert "already loaded" in lf("load", paths[0]).stdout
    assert lf.dump() == before

    # status names every load: number, outcome, file, checksum, rows, new and corrected units
    status = lf("status").stdout
    for (lid, name, sha, *_), new, corrected in zip(loads, (2, 0, 0), (0, 1, 1)):
        assert f"#{lid} " in status
        line = next(s for s in status.splitlines() if s.strip().startswith(f"#{lid} "))
        assert f"loaded: {name} (sha256 {sha[:12]}" in line
        assert f"{new} new / {corrected} corrected units" in line
