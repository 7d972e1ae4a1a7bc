"""The timed stages. Each runs in a fresh process: ``python -m bench.stages STAGE 'JSON ARGS'``.

A stage does its setup (copying a store snapshot, reading inputs) untimed, times only the work
itself with ``time.perf_counter``, and prints one line ``BENCH_RESULT {json}`` with the seconds,
stage-specific counts and the process's peak resident set size (``VmHWM`` from
``/proc/self/status``; ``ru_maxrss`` where /proc is missing). The peak covers the whole process,
imports and setup included.
"""

from __future__ import annotations

import contextlib
import inspect
import json
import math
import os
import resource
import shutil
import sys
import time
from pathlib import Path

import numpy as np

#: Effective draws per unit for expected seats, and accepted draws for the nulls (issue 8).
SEATS_EFFECTIVE_DRAWS = 100_000
NULL_DRAWS = 10_000
#: Units of the latest cycle used by the pool stages, per chamber (spread over the vote share).
SAMPLE_PER_CHAMBER = 4
#: Work cap of plain rejection per unit (seconds); its draws per second are measured within it.
REJECTION_SECONDS = 2.0
#: Accepted draws per unit used to seed the earlier cycles' pool rows (setup only, untimed).
SEED_DRAWS = 100


def peak_rss_mb() -> float:
    try:
        with open("/proc/self/status") as fh:
            for line in fh:
                if line.startswith("VmHWM:"):
                    return int(line.split()[1]) / 1024
    except OSError:
        pass
    return resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024


def reset_peak() -> bool:
    """Reset the kernel's peak-RSS mark (``VmHWM``) to the current RSS, so that the peak read
    at the end covers only what ran after this call (Linux: ``5`` into /proc/self/clear_refs)."""
    try:
        with open("/proc/self/clear_refs", "w") as fh:
            fh.write("5")
        return True
    except OSError:
        return False


_MARKED = {"reset": False}


def start_timed() -> float:
    """Called where the timed section begins: resets the peak mark, returns perf_counter()."""
    _MARKED["reset"] = reset_peak()
    return time.perf_counter()


# -- helpers ---------------------------------------------------------------------------------

def _workspace(root: str, data: str, store: str | None = None, public: str | None = None):
    from monitor.workspace import Workspace

    root = Path(root)
    shutil.rmtree(root, ignore_errors=True)
    root.mkdir(parents=True)
    shutil.copy(Path(data) / "levelfield.toml", root / "levelfield.toml")
    if store:
        shutil.copy(store, root / "history.sqlite")
    if public:
        shutil.copytree(public, root / "public")
        parts = Path(public).parent / f".{Path(public).name}-parts"  # the downloads' encoded parts
        if parts.is_dir():
            shutil.copytree(parts, root / ".public-parts")
    ws = Workspace(root)
    return ws, ws.open_store(), ws.config()


def snapshot(db, ws, dest: str) -> None:
    """Copy the store file (after folding the WAL into it) to ``dest``."""
    db.conn.execute("PRAGMA wal_checkpoint(TRUNCATE)")
    Path(dest).parent.mkdir(parents=True, exist_ok=True)
    shutil.copy(ws.store_path, dest)


def data_files(data: str) -> list[Path]:
    return sorted(Path(data).glob("results_*.csv"))


def publisher():
    """The site builder's entry point (``build_site`` or ``build``), or None while absent."""
    try:
        import monitor.publish as pub
    except ImportError:
        return None
    return getattr(pub, "build_site", None) or getattr(pub, "build", None)


def _force_option(fn) -> str | None:
    """Name of a keyword of the publisher that forces a full re-render, when it has one."""
    try:
        params = inspect.signature(fn).parameters
    except (TypeError, ValueError):
        return None
    for name in ("full", "force", "rebuild", "force_full"):
        if name in params:
            return name
    return None


def _publish(ws, db, config, out: Path | None = None, force: bool = False):
    fn = publisher()
    if fn is None:
        raise RuntimeError("monitor.publish has no build entry point yet")
    kwargs = {}
    option = _force_option(fn)
    if force and option:
        kwargs[option] = True
    if out is None:
        return fn(ws, **kwargs)
    try:
        return fn(db, config, out, **kwargs)
    except TypeError:
        return fn(ws, out=out, **kwargs)


def _publish_info(report) -> dict:
    info = {}
    for name in ("written", "unchanged", "removed", "kept"):  # kept: not even rendered
        value = getattr(report, name, None)
        if value is not None:
            info[f"files_{name}"] = len(value) if hasattr(value, "__len__") else value
    for name in ("pages", "files", "total_bytes"):
        value = getattr(report, name, None)
        if isinstance(value, (int, float)):
            info[name] = value
    return info


@contextlib.contextmanager
def cheap_pool(draws: int):
    """Within the block, the national-pool sampler keeps at most ``draws`` per unit (setup of
    the earlier cycles' stored pool rows only; never inside a timed section)."""
    import monitor.pool.nulls as N  # where compare_with_pool looks the sampler up

    original = N.simulate_delegations

    def capped(*args, **kwargs):
        kwargs["accepted"] = min(int(kwargs.get("accepted", draws)), draws)
        return original(*args, **kwargs)

    N.simulate_delegations = capped
    try:
        yield
    finally:
        N.simulate_delegations = original


# -- stages ----------------------------------------------------------------------------------

def stage_load(args: dict) -> dict:
    """Load the history (every cycle file but the new one) into an empty store, and reduce its
    contests (the step ``levelfield load`` ends with)."""
    from monitor import reductions
    from monitor.ingest.load import load_file

    ws, db, config = _workspace(args["ws"], args["data"])
    files = data_files(args["data"])[:-1]
    start_timed()
    total = 0.0
    rows = units = 0
    for path in files:
        t0 = time.perf_counter()
        report = load_file(db, path, config)
        total += time.perf_counter() - t0
        rows += report.rows_accepted
        units += len(report.units)
    t0 = time.perf_counter()
    reductions.refresh(db, config)  # the step `levelfield load` ends with: the contests' reductions
    total += time.perf_counter() - t0
    if args.get("snap"):
        snapshot(db, ws, args["snap"])
    return {"seconds": total, "files": len(files), "rows": rows, "units": units}


def stage_compute(args: dict) -> dict:
    """``compute(full=True)`` on a loaded store."""
    from monitor.compute import compute

    ws, db, config = _workspace(args["ws"], args["data"], args["store"])
    t0 = start_timed()
    report = compute(db, config, full=True)
    dt = time.perf_counter() - t0
    if args.get("snap"):
        snapshot(db, ws, args["snap"])
    return {"seconds": dt, "units": report.units_computed, "rows_written": report.rows_written}


def _inputs(args):
    from monitor.compute import settings_salt
    from monitor.inputs import measure_inputs, reduced_contests

    ws, db, config = _workspace(args["ws"], args["data"], args["store"])
    arrays = measure_inputs(reduced_contests(db), config, settings_salt(config))
    return config, arrays, config.measures


def stage_measures(args: dict) -> dict:
    """The measures on every unit of the store: ``compute_measures`` (fast) or the per-unit loop
    (baseline); with or without the 95% intervals."""
    import dataclasses

    from monitor.measures import compute_measures

    from bench.baselines import measures_per_unit

    config, arr, settings = _inputs(args)
    if not args["intervals"]:
        settings = dataclasses.replace(settings, interval_draws=0)
    n_units = len(arr.units)
    rng = np.random.default_rng(config["measures.seed"])
    t0 = start_timed()
    if args["impl"] == "fast":
        compute_measures(arr.unit, arr.votes_a, arr.votes_b, arr.uncontested, n_units, settings, rng)
    else:
        base = measures_per_unit(arr.unit, arr.votes_a, arr.votes_b, arr.uncontested, n_units, settings, rng,
                                 intervals=args["intervals"])
    dt = time.perf_counter() - t0
    out = {"seconds": dt, "units": n_units, "districts": int(arr.unit.size),
           "interval_draws": settings.interval_draws}
    if args["impl"] != "fast":
        # the baseline must compute the same numbers: compare the point values (untimed)
        point = dataclasses.replace(settings, interval_draws=0)
        long = compute_measures(arr.unit, arr.votes_a, arr.votes_b, arr.uncontested, n_units, point,
                                np.random.default_rng(0))
        wide = long.pivot(index="unit", columns="measure", values="value")
        diffs = {}
        for name in ("efficiency_gap", "mean_median", "declination", "partisan_bias", "lopsided_t"):
            f, b = wide[name].to_numpy(), base[name]
            same_nan = bool(np.array_equal(np.isnan(f), np.isnan(b)))
            diffs[name] = float(np.nanmax(np.abs(f - b))) if same_nan and np.isfinite(f).any() else (
                0.0 if same_nan else math.inf)
        out["max_abs_diff_vs_fast"] = diffs
    return out


def _latest_cycle_pools(args):
    """Pools of the latest cycle per chamber and the sampled units (deterministic)."""
    import monitor.pool as P
    from monitor.compute import settings_salt
    from monitor.inputs import measure_inputs, reduced_contests

    ws, db, config = _workspace(args["ws"], args["data"], args["store"])
    cycle = db.execute("SELECT MAX(cycle) FROM units").fetchone()[0]  # the history's latest
    arr = measure_inputs(reduced_contests(db, cycle), config, settings_salt(config))
    out = []
    for chamber in sorted(arr.units["chamber"].unique()):
        members = arr.units.index[arr.units["chamber"] == chamber].to_numpy()
        rows = np.isin(arr.unit, members)
        va, vb, st = arr.votes_a[rows], arr.votes_b[rows], arr.state[rows]
        local = np.searchsorted(members, arr.unit[rows])
        k = len(members)
        n = np.bincount(local, minlength=k)
        tot = np.bincount(local, va + vb, k)
        with np.errstate(invalid="ignore", divide="ignore"):
            share = np.bincount(local, va, k) / tot
        observed = {name: fn(local, va, vb, k) for name, fn in P.NULL_MEASURES.items()}
        ok = (va + vb) > 0
        pool = P.national_pool(va[ok], vb[ok], st[ok])
        live = np.flatnonzero((n >= 2) & np.isfinite(share))
        live = live[np.argsort(share[live], kind="stable")]
        pick = live[np.unique(np.round(np.linspace(0, live.size - 1, min(SAMPLE_PER_CHAMBER, live.size))).astype(int))]
        states = arr.units.loc[members, "state"].to_numpy()
        out.append({"chamber": chamber, "pool": pool, "state": states[pick], "n": n[pick],
                    "share": share[pick], "observed": {k2: v[pick] for k2, v in observed.items()},
                    "pool_size": int(ok.sum())})
    return config, cycle, out


def stage_pool_tilted(args: dict) -> dict:
    """Expected seats of the sampled units with at least 100,000 effective draws each (Kish ESS
    of the tilted sampler's weights), one unit at a time, in batches of at most 150,000 kept
    draws (the sampler keeps every kept draw's districts in memory); batches are combined with
    weights proportional to their ESS."""
    import monitor.pool as P

    target = args.get("effective", SEATS_EFFECTIVE_DRAWS)
    config, cycle, groups = _latest_cycle_pools(args)
    units = []
    total = 0.0
    start_timed()
    for g in groups:
        for i in range(len(g["n"])):
            t0 = time.perf_counter()
            ess_sum, means, ses, esss, accepted, proposed, ratio, batch = 0.0, [], [], [], 0, 0, 1.05, 0
            while ess_sum < target:
                want = int(min(150_000, max(1_000, math.ceil((target - ess_sum) * ratio * 1.02))))
                d = P.simulate_delegations(g["pool"], g["state"][i:i + 1], g["n"][i:i + 1], g["share"][i:i + 1],
                                           rng=np.random.SeedSequence([config["pool.seed"], batch]), tol=config["pool.tolerance"],
                                           accepted=want, max_draws=500_000_000,
                                           exclude_own=config["pool.exclude_own_state"])
                r = P.expected_seats(d, g["observed"]["seats"][i:i + 1])
                batch += 1
                if d.n_accepted[0] == 0:
                    break
                e = float(d.ess[0])
                ess_sum += e
                esss.append(e)
                means.append(float(r.expected_seats[0]))
                ses.append(float(r.mc_se[0]))
                accepted += int(d.n_accepted[0])
                proposed += int(d.n_proposed[0])
                ratio = d.n_accepted[0] / e
            dt = time.perf_counter() - t0
            total += dt
            w = np.array(esss) / ess_sum if esss else np.array([])
            units.append({"chamber": g["chamber"], "state": str(g["state"][i]), "districts": int(g["n"][i]),
                          "vote_share": float(g["share"][i]), "seconds": dt, "ess": ess_sum, "batches": batch,
                          "accepted": accepted, "proposed": proposed,
                          "expected_seats": float(w @ np.array(means)) if esss else math.nan,
                          "mc_se": float(np.sqrt(w**2 @ np.array(ses) ** 2)) if esss else math.nan})
    return {"seconds": total, "cycle": int(cycle), "units": units,
            "pool_sizes": {g["chamber"]: g["pool_size"] for g in groups}}


def stage_pool_rejection(args: dict) -> dict:
    """The same units by plain rejection sampling, each capped at REJECTION_SECONDS of work."""
    from bench.baselines import rejection_delegations

    config, cycle, groups = _latest_cycle_pools(args)
    units = []
    total = 0.0
    rng = np.random.default_rng(config["pool.seed"])
    start_timed()
    for g in groups:
        pool = g["pool"]
        t0 = time.perf_counter()
        res = rejection_delegations(pool.votes_a, pool.votes_b, pool.state, g["state"], g["n"], g["share"],
                                    rng=rng, tol=config["pool.tolerance"],
                                    accepted=args.get("accepted", SEATS_EFFECTIVE_DRAWS),
                                    max_seconds=args.get("max_seconds", REJECTION_SECONDS),
                                    max_proposals=200_000_000)
        total += time.perf_counter() - t0
        for i, r in enumerate(res):
            units.append({"chamber": g["chamber"], "state": str(g["state"][i]), "districts": int(g["n"][i]),
                          "vote_share": float(g["share"][i]), **r})
    return {"seconds": total, "cycle": int(cycle), "units": units}


def stage_nulls(args: dict) -> dict:
    """Null distributions (the 5 pooled measures) of the sampled units with at least 10,000
    effective draws each: one call per chamber with 10,500 kept draws per unit (what flags does
    with ``pool.draws``), then extra batches for the units whose Kish ESS fell short; batches
    are combined with weights proportional to their ESS."""
    import monitor.pool as P

    target = args.get("effective", NULL_DRAWS)
    config, cycle, groups = _latest_cycle_pools(args)
    total = 0.0
    ess_all, ess_first, se, batches = [], [], [], 0
    start_timed()
    for g in groups:
        t0 = time.perf_counter()
        k = len(g["n"])
        parts: list[list[tuple[float, dict]]] = [[] for _ in range(k)]
        ess = np.zeros(k)
        todo, want, batch = np.arange(k), np.full(k, int(target * 1.05)), 0
        while todo.size:
            d = P.simulate_delegations(g["pool"], g["state"][todo], g["n"][todo], g["share"][todo],
                                       rng=np.random.SeedSequence([config["pool.seed"], batch]),
                                       tol=config["pool.tolerance"], accepted=int(want[todo].max()),
                                       max_draws=500_000_000, exclude_own=config["pool.exclude_own_state"])
            nulls = P.null_distributions(d, {m: v[todo] for m, v in g["observed"].items()},
                                         alpha=config["flags.tail"])
            batches += 1
            if batch == 0:
                ess_first += [float(x) for x in d.ess]
            for pos, u in enumerate(todo):
                e = float(d.ess[pos]) if d.n_accepted[pos] else 0.0
                if e > 0:
                    ess[u] += e
                    parts[u].append((e, {m: (float(r.percentile[pos]), float(r.percentile_se[pos]))
                                         for m, r in nulls.items()}))
                    want[u] = int(min(150_000, math.ceil((target - ess[u]) * d.n_accepted[pos] / e * 1.05)))
            todo = todo[(ess[todo] < target) & (d.n_accepted > 0)]
            batch += 1
        total += time.perf_counter() - t0
        ess_all += ess.tolist()
        for u in range(k):
            tot = sum(e for e, _ in parts[u])
            for m in g["observed"]:
                pairs = [(e / tot, v[m][1]) for e, v in parts[u] if np.isfinite(v[m][1])]
                if pairs:
                    se.append(math.sqrt(sum((w * x) ** 2 for w, x in pairs)))
    return {"seconds": total, "units": len(ess_all), "calls": batches,
            "ess_min": min(ess_all), "ess_median": float(np.median(ess_all)),
            "effective_draws": float(sum(ess_all)),
            "ess_min_at_10500_kept": min(ess_first), "ess_median_at_10500_kept": float(np.median(ess_first)),
            "percentile_se_median": float(np.median(se)) if se else None,
            "percentile_se_max": float(max(se)) if se else None}


def stage_prepare(args: dict) -> dict:
    """The rest of a full rebuild on the loaded history: ``compute(full=True)`` (timed), the
    national pool and flags for every cycle (timed, with ``real_flags``; otherwise *seeded
    cheaply* with SEED_DRAWS per unit, untimed setup, see the README), and a full publish into
    the empty ``public/`` (timed: every page rendered and written). The workspace is kept as the
    state before the new cycle arrives."""
    from monitor import aggregates, events, tails  # noqa: F401  (imported before the clock starts, as before)
    from monitor.compute import compute
    from monitor.flags import run_flags

    ws, db, config = _workspace(args["ws"], args["data"], args["store"])
    t0 = start_timed()
    compute(db, config, full=True)
    t1 = time.perf_counter()
    compute_peak = peak_rss_mb()
    reset_peak()
    if args.get("real_flags"):
        flags = run_flags(db, config, full=True)
    else:
        with cheap_pool(SEED_DRAWS):
            flags = run_flags(db, config, full=True)
    aggregates.refresh(db)  # national aggregates and curves, stored for the site
    seeded_peak = peak_rss_mb()
    reset_peak()
    t2 = time.perf_counter()
    out = {"compute_seconds": t1 - t0, "flags_seconds": t2 - t1, "flags_real": bool(args.get("real_flags")),
           "groups": flags.groups_computed,
           "publish_seconds": None, "compute_peak_rss_mb": compute_peak, "flags_peak_rss_mb": seeded_peak}
    fn = publisher()
    if fn is not None:
        report = _publish(ws, db, config, force=True)
        out["publish_seconds"] = time.perf_counter() - t2
        out["publish_peak_rss_mb"] = peak_rss_mb()
        out["force_option"] = _force_option(fn)
        out.update(_publish_info(report))
        out["weight"] = _weight(ws.folder("public"))
    db.conn.execute("PRAGMA wal_checkpoint(TRUNCATE)")
    out["seconds"] = out["compute_seconds"]
    return out


def stage_incremental(args: dict) -> dict:
    """One new cycle arrives: load it (and reduce it), recompute (incremental), flags
    (incremental) and aggregates, republish (unless ``publish`` is false)."""
    src = Path(args["ready"])
    public = src / "public"
    ws, db, config = _workspace(args["ws"], args["data"], str(src / "history.sqlite"),
                                str(public) if public.is_dir() else None)
    out = _timed_chain(ws, db, config, Path(args["file"]), publish=args.get("publish", True))
    if args.get("keep"):
        db.conn.execute("PRAGMA wal_checkpoint(TRUNCATE)")
    return out


def stage_flags_nochange(args: dict) -> dict:
    """``run_flags`` on an up-to-date store: nothing to recompute (the fixed cost of a refresh)."""
    from monitor.flags import run_flags

    src = Path(args["final"])
    ws, db, config = _workspace(args["ws"], args["data"], str(src / "history.sqlite"))
    t0 = start_timed()
    report = run_flags(db, config)
    return {"seconds": time.perf_counter() - t0, "groups_computed": report.groups_computed,
            "groups_total": report.groups_total}


def stage_publish_full(args: dict) -> dict:
    """Build the whole site of the history into an empty folder (the naive publisher: every
    page rendered and written), with the publisher's force-full option when it has one."""
    src = Path(args["ready"])
    ws, db, config = _workspace(args["ws"], args["data"], str(src / "history.sqlite"))
    fn = publisher()
    if fn is None:
        return {"skipped": "monitor.publish has no build entry point yet", "seconds": None}
    out = Path(args["ws"]) / "public-full"
    t0 = start_timed()
    report = _publish(ws, db, config, out=out, force=True)
    dt = time.perf_counter() - t0
    return {"seconds": dt, "force_option": _force_option(fn), **_publish_info(report), "weight": _weight(out)}


def _weight(site: Path) -> dict:
    """The weight budget (issue 15) of a site just built, measured after its clock stopped."""
    from monitor.publish.weight import weigh

    return weigh(Path(site)).summary()


def _timed_chain(ws, db, config, path: Path, publish: bool = True) -> dict:
    """Load ``path`` (and reduce it), recompute (incremental), flags and aggregates, republish
    (when ``publish`` and there is a publisher): the steps and their seconds."""
    from monitor import aggregates, reductions
    from monitor.compute import compute
    from monitor.flags import run_flags
    from monitor.ingest.load import load_file

    t0 = start_timed()
    load_file(db, path, config)
    reductions.refresh(db, config)
    t1 = time.perf_counter()
    measures = compute(db, config)
    t2 = time.perf_counter()
    flags = run_flags(db, config)
    aggregates.refresh(db)
    t3 = time.perf_counter()
    steps = {"load": t1 - t0, "compute": t2 - t1, "flags": t3 - t2}
    info = {"units_computed": measures.units_computed, "groups_computed": flags.groups_computed,
            "groups_total": flags.groups_total}
    if publish and publisher() is not None:
        info.update(_publish_info(_publish(ws, db, config)))
        steps["publish"] = time.perf_counter() - t3
    return {"seconds": time.perf_counter() - t0, "steps": steps, **info}


def stage_correction(args: dict) -> dict:
    """One state's corrected file after the new cycle: one unit re-delivered (the first state's
    lower chamber of the new cycle, a few counts changed), then the incremental chain and the
    republish, as a watcher runs them."""
    from bench.scenarios import corrected_file

    src = Path(args["final"])
    ws, db, config = _workspace(args["ws"], args["data"], str(src / "history.sqlite"), str(src / "public"))
    path, state, chamber = corrected_file(Path(args["file"]), Path(args["ws"]).parent / "corrected.csv")
    out = _timed_chain(ws, db, config, path)
    out.update(state=state, chamber=chamber)
    return out


def stage_arrivals(args: dict) -> dict:
    """The new cycle arriving state by state: one file per state dropped into the inbox, each
    followed by ``levelfield watch --once --every 1`` (a fresh process, as from cron: look, wait
    one second for the file to settle, load, recompute, republish). Seconds per file with and
    without that one-second wait; the largest peak RSS of the watcher processes."""
    from bench.scenarios import state_files

    src = Path(args["ready"])
    ws, db, config = _workspace(args["ws"], args["data"], str(src / "history.sqlite"), str(src / "public"))
    db.conn.close()
    files = state_files(Path(args["file"]), Path(args["ws"]).parent / "arrivals")
    limit = args.get("max_files")
    files = files[:limit] if limit else files
    exe = [sys.executable, "-m", "monitor", "-w", str(ws.root), "watch", "--once", "--every", "1"]
    per_file, failures = [], 0
    t0 = start_timed()
    for path in files:
        shutil.copy(path, ws.inbox / path.name)
        t = time.perf_counter()
        proc = __import__("subprocess").run(exe, capture_output=True, text=True)
        per_file.append(time.perf_counter() - t)
        failures += proc.returncode != 0
    total = time.perf_counter() - t0
    child = resource.getrusage(resource.RUSAGE_CHILDREN).ru_maxrss / 1024
    return {"seconds": total, "files": len(files), "failed": failures, "per_file": per_file,
            "per_file_max": max(per_file), "per_file_median": sorted(per_file)[len(per_file) // 2],
            "seconds_without_settle_wait": total - len(files) * 1.0, "watch_peak_rss_mb": child}


def stage_startup(args: dict) -> dict:
    """Start-up of ``levelfield --help``, ``status`` and ``flags`` on the final store (fresh
    processes, median of 5 each), and whether they import what they do not use."""
    import statistics
    import subprocess

    src = Path(args["final"])
    ws, db, config = _workspace(args["ws"], args["data"], str(src / "history.sqlite"))
    db.conn.close()
    heavy = ("scipy", "altair", "jinja2", "vl_convert", "apscheduler", "monitor.measures", "monitor.pool")
    out: dict = {}
    start_timed()
    for name, argv in (("help", ["--help"]), ("status", ["-w", str(ws.root), "status"]),
                       ("flags", ["-w", str(ws.root), "flags"])):
        runs = []
        for _ in range(5):
            t = time.perf_counter()
            subprocess.run([sys.executable, "-m", "monitor", *argv], capture_output=True, check=True)
            runs.append(time.perf_counter() - t)
        out[f"{name}_seconds"] = statistics.median(runs)
        trace = subprocess.run([sys.executable, "-X", "importtime", "-m", "monitor.cli", *argv],
                               capture_output=True, text=True).stderr
        loaded = {line.rsplit("|", 1)[-1].strip() for line in trace.splitlines() if line.startswith("import time:")}
        out[f"{name}_imports"] = sorted(m for m in heavy if m in loaded)
        out[f"{name}_imports_pandas"] = "pandas" in loaded
    out["seconds"] = out["help_seconds"]
    return out


STAGES = {
    "correction": stage_correction,
    "arrivals": stage_arrivals,
    "startup": stage_startup,
    "load": stage_load,
    "compute": stage_compute,
    "measures": stage_measures,
    "pool_tilted": stage_pool_tilted,
    "pool_rejection": stage_pool_rejection,
    "nulls": stage_nulls,
    "prepare": stage_prepare,
    "incremental": stage_incremental,
    "flags_nochange": stage_flags_nochange,
    "publish_full": stage_publish_full,
}


def main(argv: list[str]) -> int:
    name, args = argv[0], json.loads(argv[1])
    result = STAGES[name](args)
    result["peak_rss_mb"] = peak_rss_mb()
    result["peak_is_stage_only"] = _MARKED["reset"]
    sys.stdout.write("BENCH_RESULT " + json.dumps(result) + "\n")
    sys.stdout.flush()
    if args.get("ws") and not args.get("keep"):
        shutil.rmtree(args["ws"], ignore_errors=True)
    return 0


if __name__ == "__main__":
    os.environ.setdefault("PYTHONHASHSEED", "0")
    raise SystemExit(main(sys.argv[1:]))
