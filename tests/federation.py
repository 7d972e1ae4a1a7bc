"""A seeded generator of invented federations for the flag tests (not the demo's sample).

Each state has a lean; each plan (one per decade) draws district leans around it. A neutral
plan draws them from one normal law; a packed-and-cracked plan by party p puts the other
party's voters into a quarter of the districts at 75-85% and spreads the rest so p wins them at
54-60%. Each cycle adds a national swing and district noise. Invented data: a test fixture,
never a check value.
"""

from __future__ import annotations

import csv
from pathlib import Path

import numpy as np


def district_shares(rng, n: int, lean: float, plan: str) -> np.ndarray:
    """Party a's expected two-party shares of a plan's n districts."""
    if plan == "neutral":
        return np.clip(0.5 + lean + rng.normal(0.0, 0.11, n), 0.08, 0.92)
    packed = max(1, n // 4)
    favoured_is_a = plan == "packs_b"
    high = rng.uniform(0.75, 0.85, packed)      # the other party's packed districts
    low = rng.uniform(0.54, 0.60, n - packed)   # the favoured party's cracked wins
    if favoured_is_a:
        return np.concatenate([1 - high, low])   # b packed, a wins the rest
    return np.concatenate([high, 1 - low])       # a packed, b wins the rest


def federation(seed: int, *, states: int = 50, gerrymandered: float = 0.0,
               decades=(1992, 2002), cycles_per_decade: int = 3):
    """Rows of a native long CSV and the truth: {(state, plan_id): 'a' | 'b' | None}."""
    rng = np.random.default_rng(seed)
    codes = [f"{chr(65 + i // 26)}{chr(65 + i % 26)}" for i in range(states)]
    sizes = rng.integers(6, 15, states)
    leans = rng.normal(0.0, 0.03, states)
    engineered = set(rng.choice(states, int(round(gerrymandered * states)), replace=False).tolist())
    truth, rows = {}, []
    for start in decades:
        for s, code in enumerate(codes):
            if s in engineered:
                plan = "packs_b" if s % 2 == 0 else "packs_a"
            else:
                plan = "neutral"
            truth[(code, f"{code}-federal-{start}")] = {"packs_b": "a", "packs_a": "b"}.get(plan)
            base = district_shares(rng, int(sizes[s]), leans[s], plan)
            for k in range(cycles_per_decade):
                cycle = start + 2 * k
                swing = rng.normal(0.0, 0.015)
                shares = np.clip(base + swing + rng.normal(0.0, 0.015, base.size), 0.02, 0.98)
                turnout = rng.integers(120_000, 220_000, base.size)
                for d, (x, t) in enumerate(zip(shares, turnout), 1):
                    rows.append((cycle, code, "federal", str(d), "Alpha", f"A{code}{d}", int(round(x * t))))
                    rows.append((cycle, code, "federal", str(d), "Beta", f"B{code}{d}", int(round((1 - x) * t))))
    return rows, truth


def write_federation(path: Path, rows) -> Path:
    with path.open("w", newline="", encoding="utf-8") as fh:
        writer = csv.writer(fh, lineterminator="\n")
        writer.writerow(["cycle", "state", "chamber", "district", "party", "candidate", "votes"])
        writer.writerows(rows)
    return path


FEDERATION_TOML = """
[parties.a]
name = "Alpha"
labels = ["Alpha"]
colour = "#11808a"
[parties.b]
name = "Beta"
labels = ["Beta"]
colour = "#d4900f"
[measures]
interval_draws = 20
[pool]
draws = 1000
"""
