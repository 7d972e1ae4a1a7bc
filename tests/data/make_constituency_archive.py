"""Write ``constituency_archive.csv``: an invented file shaped like a national archive of
constituency returns (one row per candidate line, every quirk such archives have).

Everything here is invented: the states (Orvanne, Kestrel Reach, Talmoor, Bracque, Quennel and
the non-voting Xander Docks), the parties (HEARTHSIDE and its fusion line HEARTHSIDE-CRAFT,
MERIDIAN, LANTERN, SALTMARSH), the names and the counts. Run it to regenerate the file:

    python tests/data/make_constituency_archive.py

The quirks, each in its own place (tests/test_load_archive.py checks each):

* scattered write-in tallies on several lines (candidate WRITEIN, no party): OV 2018 district 2;
* counting modes on separate rows (ELECTION DAY / EARLY / ABSENTEE): BQ 2020;
* placeholder counts for an unopposed candidate not on the ballot: -1 (TM 2016 district 2), a
  lone candidate with 1 vote (TM 2018 district 3) and with 0 votes (TM 2020 district 1);
* unofficial TRUE/FALSE instead of certified/unofficial: TM 2018 is unofficial;
* a special general that replaced the regular one in some districts: KR 2018 districts 3 and 4;
* a special for an unexpired term beside the regular general (the regular decides): OV 2020
  district 3;
* runoffs that decide the seat (runoff TRUE after a first round with runoff FALSE): QN 2020
  districts 2 and 3; QN district 1 was won in the first round;
* lines that are not candidates (BLANK VOTE, OVER VOTES, UNDER VOTES, SCATTERING, VOID): BQ 2018,
  QN 2020 district 1;
* fusion (one candidate on two party lines, fusion_ticket TRUE): OV 2016 district 4;
* primaries (stage PRI) to filter out, at-large districts coded "0" (BQ), a non-voting delegate
  (XD) to exclude, runoff NA where a state holds no runoffs.
"""

from __future__ import annotations

import csv
from pathlib import Path

HEADER = ["year", "state", "state_po", "district", "stage", "runoff", "special", "candidate", "party",
          "writein", "mode", "candidatevotes", "totalvotes", "unofficial", "fusion_ticket"]
STATES = {"OV": "ORVANNE", "KR": "KESTREL REACH", "TM": "TALMOOR", "BQ": "BRACQUE", "QN": "QUENNEL",
          "XD": "XANDER DOCKS"}
H, M, L, S = "HEARTHSIDE", "MERIDIAN", "LANTERN", "SALTMARSH"


def contest(year, st, district, lines, *, stage="GEN", runoff="NA", special=False, unofficial=False,
            modes=None, fusion=False):
    """Rows of one contest; ``lines``: (candidate, party, votes) or, with ``modes``, (candidate,
    party, [votes per mode])."""
    rows = []
    if modes:
        flat = [(c, p, v, m) for c, p, vs in lines for m, v in zip(modes, vs)]
    else:
        flat = [(c, p, v, "TOTAL") for c, p, v in lines]
    total = sum(v for _, _, v, _ in flat)
    for cand, party, votes, mode in flat:
        rows.append([year, STATES[st], st, district, stage, runoff, str(special).upper(), cand, party,
                     "TRUE" if cand == "WRITEIN" else "FALSE", mode, votes, total,
                     str(unofficial).upper(), str(fusion).upper()])
    return rows


def archive() -> list[list]:
    rows: list[list] = []
    add = rows.extend
    # Orvanne: four districts, three cycles
    add(contest(2016, "OV", "1", [("Arden Vell", H, 61234), ("Corin Mast", M, 48000)]))
    add(contest(2016, "OV", "2", [("Bela Thorn", H, 40100), ("Dace Orrin", M, 52300), ("Ivo Penn", L, 3100)]))
    add(contest(2016, "OV", "3", [("Cyra Holt", H, 35500), ("Edda Voss", M, 55200)]))
    add(contest(2016, "OV", "4", [("Fenn Arlo", H, 30000), ("Fenn Arlo", "HEARTHSIDE-CRAFT", 4500),
                                  ("Gale Rusk", M, 31000)], fusion=True))
    add(contest(2018, "OV", "1", [("Arden Vell", H, 50500), ("Hale Brin", M, 47250)]))
    add(contest(2018, "OV", "2", [("Jory Wend", H, 39900), ("Dace Orrin", M, 41000),
                                  ("WRITEIN", "", 210), ("WRITEIN", "", 95), ("WRITEIN", "", 12)]))
    add(contest(2018, "OV", "3", [("Kira Lune", H, 33000), ("Edda Voss", M, 51800)]))
    add(contest(2018, "OV", "4", [("Fenn Arlo", H, 36000), ("Gale Rusk", M, 29500)]))
    add(contest(2018, "OV", "2", [("Jory Wend", H, 8800), ("Lio Sark", H, 6100)], stage="PRI"))
    add(contest(2018, "OV", "2", [("Dace Orrin", M, 9900)], stage="PRI"))
    add(contest(2020, "OV", "1", [("Arden Vell", H, 70100), ("Mira Quell", M, 66900)]))
    add(contest(2020, "OV", "2", [("Jory Wend", H, 51000), ("Dace Orrin", M, 50400)]))
    add(contest(2020, "OV", "3", [("Kira Lune", H, 41000), ("Nils Harth", M, 60200)]))
    # district 3's seat fell vacant: a special for the rest of the term, held the same day
    add(contest(2020, "OV", "3", [("Oona Pell", H, 39800), ("Edda Voss", M, 61900)], special=True))
    add(contest(2020, "OV", "4", [("Fenn Arlo", H, 48800), ("Pim Castor", M, 45100)]))
    # Kestrel Reach: in 2018 a court replaced the regular general of districts 3 and 4 by specials
    add(contest(2018, "KR", "1", [("Quin Asher", H, 44000), ("Rhea Dunmore", M, 38800)]))
    add(contest(2018, "KR", "2", [("Sol Varga", H, 29900), ("Tess Imre", M, 45600)]))
    add(contest(2018, "KR", "3", [("Ulla Frane", H, 30300), ("Vann Coil", M, 30900)], special=True))
    add(contest(2018, "KR", "4", [("Wes Oduya", H, 41700), ("Xio Barr", M, 22100), ("Yann Cole", S, 2600)],
                special=True))
    add(contest(2020, "KR", "1", [("Quin Asher", H, 52000), ("Zara Welt", M, 47000)]))
    add(contest(2020, "KR", "2", [("Abel Korr", H, 33300), ("Tess Imre", M, 55500)]))
    add(contest(2020, "KR", "3", [("Ulla Frane", H, 40400), ("Vann Coil", M, 39900)]))
    add(contest(2020, "KR", "4", [("Wes Oduya", H, 50200), ("Bryn Solt", M, 30100)]))
    # Talmoor: unopposed candidates not on the ballot, recorded with placeholder counts
    add(contest(2016, "TM", "1", [("Cato Rell", H, 28800), ("Dara Finch", M, 30300)]))
    add(contest(2016, "TM", "2", [("Esme Hart", M, -1)]))
    add(contest(2016, "TM", "3", [("Floy Amsel", H, 34400), ("Gus Tarrow", M, 26600)]))
    add(contest(2018, "TM", "1", [("Cato Rell", H, 31900), ("Dara Finch", M, 29900)], unofficial=True))
    add(contest(2018, "TM", "2", [("Hugo Brand", H, 20500), ("Esme Hart", M, 35100)], unofficial=True))
    add(contest(2018, "TM", "3", [("Floy Amsel", H, 1)], unofficial=True))
    add(contest(2020, "TM", "1", [("Cato Rell", H, 0)]))
    add(contest(2020, "TM", "2", [("Ines Morrow", H, 30100), ("Esme Hart", M, 40700)]))
    add(contest(2020, "TM", "3", [("Floy Amsel", H, 44000), ("Jem Ostrow", M, 30000)]))
    # Bracque: one at-large seat (district "0"); non-candidate lines; counting modes in 2020
    add(contest(2016, "BQ", "0", [("Kael Dorran", H, 120500), ("Lyra Fenwick", M, 131400),
                                  ("Moss Tully", L, 6200)]))
    add(contest(2018, "BQ", "0", [("Kael Dorran", H, 101000), ("Nia Sorrel", M, 99000),
                                  ("BLANK VOTE", "", 1300), ("OVER VOTES", "", 42), ("UNDER VOTES", "", 2900)]))
    add(contest(2020, "BQ", "0", [("Kael Dorran", H, [60100, 30200, 14400]),
                                  ("Nia Sorrel", M, [58800, 33100, 12900]),
                                  ("Moss Tully", L, [2100, 900, 400])],
                modes=["ELECTION DAY", "EARLY", "ABSENTEE"]))
    # Quennel: runoffs when no candidate has a majority
    add(contest(2020, "QN", "1", [("Orla Vint", H, 41000), ("Pax Merrow", M, 35000),
                                  ("SCATTERING", "", 700), ("VOID", "", 310)], runoff="FALSE"))
    add(contest(2020, "QN", "2", [("Rook Hallam", H, 21000), ("Sela Brook", H, 9800), ("Tam Ives", M, 27300),
                                  ("Uri Gast", S, 4100)], runoff="FALSE"))
    add(contest(2020, "QN", "2", [("Rook Hallam", H, 33800), ("Tam Ives", M, 31900)], runoff="TRUE"))
    add(contest(2020, "QN", "3", [("Vida Crane", H, 25500), ("Wyn Tollar", M, 26100), ("Xan Pirie", L, 5200)],
                runoff="FALSE"))
    add(contest(2020, "QN", "3", [("Vida Crane", H, 30700), ("Wyn Tollar", M, 28000)], runoff="TRUE"))
    add(contest(2020, "QN", "1", [("Orla Vint", H, 12000)], stage="PRI", runoff="FALSE"))
    # Xander Docks: a non-voting delegate (excluded by the mapping)
    for year in (2016, 2018, 2020):
        add(contest(year, "XD", "0", [("Yuri Blane", H, 9100 + year % 100), ("Zed Amory", M, 8000)]))
    return rows


def main() -> None:
    path = Path(__file__).with_name("constituency_archive.csv")
    with path.open("w", newline="", encoding="utf-8") as fh:
        writer = csv.writer(fh, lineterminator="\n")
        writer.writerow(HEADER)
        writer.writerows(archive())


if __name__ == "__main__":
    main()
