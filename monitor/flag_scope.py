"""What a flags run must do again: the (cycle, chamber) groups whose inputs changed.

A group's tails rows (nulls, judgement, cross-state context) and expected seats depend on its
national pool (:func:`group_hash`: the pool settings and each unit's measures'
inputs hash) and on what the judge reads besides: the flag settings, the plan each unit is
assigned (its id, who drew it, whether inferred), each unit's seat coverage and whether it is
one class of a staggered chamber. :func:`judge_bases` digests all of it per group; a run redoes
the groups whose digest differs from the one stored in ``bases`` (step ``flags``), redraws the
pool of those whose pool digest differs, and leaves every other row as stored. Across groups,
only two things reach further: the robust z across cycles (every cycle of a chamber) and the
watch list (every cycle of a plan); :mod:`monitor.flags` recomputes those for the chambers and
state chambers of the groups redone.
"""

from __future__ import annotations

import hashlib
import json
from dataclasses import dataclass

import numpy as np
import pandas as pd

from monitor.config import Config, section_options
from monitor.inputs import UNIT_KEYS

POOL_METHOD_VERSION = "pool-3"  # pool-2: observed values and null rules taken from the engine; pool-3: the last
# district of a simulated delegation drawn within reach, with rejection control (new random streams)
#: bump when what the judge, the cross-state context or the watch list store changes
FLAGS_METHOD_VERSION = "flags-1"
STEP = "flags"


def group_key(cycle, chamber) -> str:
    return f"{int(cycle)}|{chamber}"


def group_of(key: str) -> tuple[int, str]:
    cycle, chamber = key.split("|", 1)
    return int(cycle), chamber


def group_hash(units: pd.DataFrame, config: Config) -> str:
    """What a group's pool rows depend on: the pool and tail settings, each unit's inputs hash."""
    h = hashlib.sha256(POOL_METHOD_VERSION.encode())
    h.update(json.dumps({k: config[k] for k in (
        "pool.tolerance", "pool.draws", "pool.exclude_own_state", "pool.seed", "flags.min_districts",
        "flags.tail")}, sort_keys=True).encode())
    for key, value in sorted(zip(units["state"], units["inputs_hash"])):
        h.update(f"{key}\x1f{value}\n".encode())
    return h.hexdigest()


def _head(config: Config) -> str:
    from monitor.measures import registry  # the flag declarations (monitor.tails would bring the pool)

    settings = {opt.name: config[opt.name] for section in ("flags", "pool", "staggered")
                for opt in section_options(section)}
    judged = {name: [m.name, m.flag.null, m.flag.p_value, m.flag.also_undefined_where] for name, m in registry.flag_by_name().items()}
    return json.dumps({"version": FLAGS_METHOD_VERSION, "settings": settings, "judged": judged},
                      sort_keys=True, default=str)


def judge_bases(units: pd.DataFrame, pool: dict[str, str], plans: pd.DataFrame, coverage: pd.Series,
                partial: np.ndarray, config: Config) -> dict[str, str]:
    """``cycle|chamber`` -> the digest of what the group's flags rows are computed from: its pool
    digest (``pool``), the flag settings and declarations, and per unit (``units``: sorted by
    cycle, state, chamber; ``plans``: their plans in the same order; ``coverage``: seat coverage by
    unit key; ``partial``: per unit) the plan, the seat coverage and whether it is partial."""
    head = _head(config)
    share = coverage.reindex(pd.MultiIndex.from_frame(units[UNIT_KEYS])).to_numpy(float)
    lines = [f"{s}|{p}|{d}|{int(i)}|{float(c)!r}|{bool(h)}\n" for s, p, d, i, c, h in zip(
        units["state"], plans["plan_id"], plans["drawn_by"], plans["inferred"], share, partial)]
    by_group: dict[str, list[str]] = {}
    for key, line in zip((group_key(c, ch) for c, ch in zip(units["cycle"], units["chamber"])), lines):
        by_group.setdefault(key, []).append(line)
    return {key: hashlib.sha256(f"{head}\n{pool[key]}\n{''.join(part)}".encode()).hexdigest()
            for key, part in by_group.items()}


@dataclass
class Scope:
    """The groups of a flags run: every current one, those to redo (their basis changed, or gone
    from the store), and among them those whose pool is redrawn."""

    groups: list[str]
    todo: list[str]
    redraw: set[str]
    bases: dict[str, str]

    @property
    def todo_groups(self) -> list[tuple[int, str]]:
        return [group_of(k) for k in self.todo]


def scope(units: pd.DataFrame, plans: pd.DataFrame, coverage: pd.Series, partial: np.ndarray, config: Config,
          known: dict[str, str], stored_pool: dict[str, str], full: bool) -> tuple[Scope, dict[str, str]]:
    """The :class:`Scope` of a run over ``units`` (:func:`monitor.flags.flag_units`) and each
    current group's pool digest; ``known``: the stored bases, ``stored_pool``: the pool digests the
    stored pool rows were computed from."""
    keys = [group_key(c, ch) for c, ch in zip(units["cycle"], units["chamber"])]
    pool = {key: group_hash(part, config) for key, part in units.groupby(np.array(keys, dtype=object), sort=True)}
    bases = judge_bases(units, pool, plans, coverage, partial, config)
    groups = sorted(bases)
    if full:
        todo = sorted(set(groups) | set(known))
        redraw = set(groups)
    else:
        todo = sorted(g for g in set(groups) | set(known) if known.get(g) != bases.get(g))
        redraw = {g for g in todo if g in pool and stored_pool.get(g) != pool[g]}
    return Scope(groups, todo, redraw, bases), pool
