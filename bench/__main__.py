"""``python -m bench``: the national-scale benchmarks (issue 8). See bench/__init__.py."""

from __future__ import annotations

import argparse
import datetime as dt
import json
import math
import os
import platform
import shutil
import statistics
import subprocess
import sys
import tempfile
import time
from pathlib import Path

from bench import synthetic

REPO = Path(__file__).resolve().parent.parent
RESULTS = REPO / "bench" / "results" / "latest.json"
DEFAULT_SCALES = (0.25, 0.5, 1.0, 2.0)

TARGETS = {
    "measures_speedup": 20.0,        # fast / per-unit baseline, at least
    "pool_draws_speedup": 50.0,      # effective draws per second, tilted / rejection, at least
    "incremental_fraction": 0.10,    # incremental / full rebuild, at most
    "correction_fraction": 1 / 30,   # one state's corrected file / full rebuild, at most (issue 17)
    "flags_speedup": 4.0,            # full flags before issue 17 / now, at least
    "growth_slope": 1.2,             # log-log slope of time on contests, at most (near-linear)
    "rss_slope": 1.0,                # log-log slope of peak RSS on contests, below (sub-linear)
    "peak_rss_mb_1x": 1024.0,        # peak memory of every stage at 1x, below
}

#: The full flags (national pool with 2,000 kept draws per unit, every cycle) before issue 17,
#: measured by this bench on this machine (2 CPUs, AMD EPYC, 2026-12-02; README, Performance): the
#: baseline of the flags speed-up. That path drew the nulls one unit at a time with a guide table
#: of one slot per district, sorted every delegation with a two-key sort and re-read and
#: re-reduced every contest of the history; the sampler's draws are unchanged bit for bit, so
#: the numbers it computed are the ones computed now (tests/test_pool.py, levelfield verify).
FLAGS_FULL_BEFORE = {"0.25": 57.5, "0.5": 109.4, "1": 221.9, "2": 504.7}


def machine() -> dict:
    cpu = "unknown"
    try:
        for line in Path("/proc/cpuinfo").read_text().splitlines():
            if line.startswith("model name"):
                cpu = line.split(":", 1)[1].strip()
                break
    except OSError:
        pass
    ram = None
    try:
        for line in Path("/proc/meminfo").read_text().splitlines():
            if line.startswith("MemTotal:"):
                ram = round(int(line.split()[1]) / 2**20, 1)
    except OSError:
        pass
    import numpy
    import pandas
    import scipy

    return {"nproc": os.cpu_count(), "cpu": cpu, "ram_gib": ram, "python": platform.python_version(),
            "numpy": numpy.__version__, "pandas": pandas.__version__, "scipy": scipy.__version__,
            "platform": platform.platform()}


class Runner:
    """Runs stages in fresh processes and applies the run-count rule."""

    def __init__(self, quick: bool, budget_s: float, short_s: float = 20.0):
        self.quick = quick
        self.budget_s = budget_s
        self.short_s = short_s
        self.start = time.perf_counter()
        self.log: list[dict] = []

    def elapsed(self) -> float:
        return time.perf_counter() - self.start

    def once(self, stage: str, args: dict) -> dict:
        env = dict(os.environ, PYTHONHASHSEED="0")
        env["PYTHONPATH"] = str(REPO) + os.pathsep + env.get("PYTHONPATH", "")
        load_before = os.getloadavg()[0]
        t0 = time.perf_counter()
        proc = subprocess.run([sys.executable, "-m", "bench.stages", stage, json.dumps(args)],
                              cwd=REPO, env=env, capture_output=True, text=True)
        wall = time.perf_counter() - t0
        for line in reversed(proc.stdout.splitlines()):
            if line.startswith("BENCH_RESULT "):
                result = json.loads(line[len("BENCH_RESULT "):])
                result["wall_seconds"] = wall
                result["loadavg_1min"] = [round(load_before, 2), round(os.getloadavg()[0], 2)]
                return result
        tail = (proc.stderr or proc.stdout).strip().splitlines()[-15:]
        return {"error": f"stage {stage} failed (exit {proc.returncode})", "stderr_tail": tail,
                "seconds": None, "wall_seconds": wall}

    def short_limit(self, scale: float) -> float:
        if self.quick or self.elapsed() > 0.85 * self.budget_s:
            return 0.0
        return self.short_s if scale < 2 else self.short_s / 2

    def extend(self, entry: dict, stage: str, args: dict, runs: int = 3) -> None:
        """More runs of a short stage measured inside another (median over all)."""
        while entry["runs"] < runs:
            r = self.once(stage, args)
            if r.get("seconds") is None:
                break
            entry["run_seconds"].append(r["seconds"])
            entry["runs"] += 1
            entry["peak_rss_mb"] = max(entry.get("peak_rss_mb") or 0, r.get("peak_rss_mb") or 0)
        entry["seconds"] = statistics.median(entry["run_seconds"])
        print(f"      {entry['stage']}: median of {entry['runs']} runs {entry['seconds']:.2f} s", flush=True)

    def record(self, scale: float, label: str, result: dict) -> dict:
        entry = {"scale": scale, "stage": label, **result}
        self.log.append(entry)
        print(f"  [{self.elapsed() / 60:5.1f} min] {label:<26} x{scale:<5g} {result['seconds']:.2f} s"
              f"  (measured inside the previous stage)", flush=True)
        return entry

    def timed(self, stage: str, args: dict, *, scale: float, label: str | None = None,
              first_args: dict | None = None, max_runs: int = 3) -> dict:
        """Median of several runs: 3 when the first run is short, else 1 (see ``runs_rule``)."""
        label = label or stage
        runs = [self.once(stage, {**args, **(first_args or {})})]
        first = runs[0]
        wanted = 1
        if first.get("seconds") is not None and first["seconds"] < self.short_limit(scale):
            wanted = max_runs
        while len(runs) < wanted:
            runs.append(self.once(stage, args))
        ok = [r for r in runs if r.get("seconds") is not None]
        out = dict(first)
        out["runs"] = len(runs)
        out["run_seconds"] = [r.get("seconds") for r in runs]
        out["seconds"] = statistics.median(r["seconds"] for r in ok) if ok else None
        out["peak_rss_mb"] = max((r.get("peak_rss_mb") or 0) for r in runs)
        out["loadavg_1min_max"] = max(max(r.get("loadavg_1min") or [0]) for r in runs)
        if "steps" in first and len(ok) > 1:
            out["steps"] = {k: statistics.median(r["steps"][k] for r in ok) for k in first["steps"]}
        entry = {"scale": scale, "stage": label, **out}
        self.log.append(entry)
        status = f"{out['seconds']:.2f} s" if out["seconds"] is not None else out.get("error") or out.get("skipped")
        print(f"  [{self.elapsed() / 60:5.1f} min] {label:<26} x{scale:<5g} {status}"
              f"  (runs {len(runs)}, peak {out['peak_rss_mb']:.0f} MB, load avg <= {out['loadavg_1min_max']:.1f})",
              flush=True)
        if out.get("error"):
            print("      " + "\n      ".join(out.get("stderr_tail", [])), flush=True)
        return entry


def run_scale(runner: Runner, scale: float, work: Path, complete: bool, real_flags: bool,
              arrivals: bool = False) -> dict:
    """The stages at one scale. ``complete``: also the paired baselines and the pool stages
    (their ratios are judged at one scale); otherwise only the growth-curve stages."""
    print(f"scale x{scale:g}" + ("" if complete else " (growth-curve stages)"), flush=True)
    data = work / "data"
    snaps = work / "snap"
    t0 = time.perf_counter()
    summary = synthetic.generate(data, scale)
    gen_s = time.perf_counter() - t0
    files = [Path(p) for p in summary.pop("files")]
    print(f"  generated {summary['contests']:,} contests ({summary['rows']:,} rows, {summary['states']} states, "
          f"{summary['cycles']} cycles) + 1 new cycle in {gen_s:.1f} s", flush=True)
    ws = str(work / "ws")
    base = {"data": str(data), "ws": ws}
    loaded_path = str(snaps / "loaded.sqlite")
    st: dict[str, dict] = {}
    st["load_full"] = runner.timed("load", base, scale=scale, label="load_full", first_args={"snap": loaded_path})
    if not Path(loaded_path).exists():
        return {"summary": summary, "generate_seconds": gen_s, "stages": st}
    loaded = {**base, "store": loaded_path}
    ready = work / "ready"
    prep = runner.timed("prepare", {**base, "ws": str(ready), "store": loaded_path, "keep": True,
                                    "real_flags": real_flags},
                        scale=scale, max_runs=1, label="compute_full")
    if prep.get("compute_peak_rss_mb"):
        prep["peak_rss_mb"] = prep["compute_peak_rss_mb"]  # the process also seeded flags and published
    st["compute_full"] = prep
    if prep.get("seconds") is not None and prep["seconds"] < runner.short_limit(scale):
        runner.extend(prep, "compute", loaded)
    if prep.get("flags_real"):
        st["flags_full"] = runner.record(scale, "flags_full", {
            "seconds": prep["flags_seconds"], "runs": 1, "run_seconds": [prep["flags_seconds"]],
            "peak_rss_mb": prep.get("flags_peak_rss_mb"), "groups": prep.get("groups")})
    if prep.get("publish_seconds") is not None:
        st["publish_full"] = runner.record(scale, "publish_full", {
            "seconds": prep["publish_seconds"], "runs": 1, "run_seconds": [prep["publish_seconds"]],
            "peak_rss_mb": prep.get("publish_peak_rss_mb"), **{k: v for k, v in prep.items() if k.startswith("files")
                                                        or k in ("pages", "total_bytes", "force_option", "weight")}})
        if prep["publish_seconds"] < runner.short_limit(scale):
            runner.extend(st["publish_full"], "publish_full", {**base, "ready": str(ready)})
    if complete:
        for impl in ("fast", "baseline"):
            for intervals in (False, True):
                name = f"measures_{impl}_{'intervals' if intervals else 'point'}"
                st[name] = runner.timed("measures", {**loaded, "impl": impl, "intervals": intervals},
                                        scale=scale, label=name)
        st["pool_tilted"] = runner.timed("pool_tilted", loaded, scale=scale, max_runs=1)
        st["pool_rejection"] = runner.timed("pool_rejection", loaded, scale=scale, max_runs=1)
        st["nulls"] = runner.timed("nulls", loaded, scale=scale)
    final = work / "final"
    if (ready / "history.sqlite").exists():
        st["incremental"] = runner.timed("incremental", {**base, "ready": str(ready), "file": str(files[-1])},
                                         scale=scale, first_args={"ws": str(final), "keep": True})
    if (final / "history.sqlite").exists():
        st["flags_nochange"] = runner.timed("flags_nochange", {**base, "final": str(final)}, scale=scale)
        st["correction"] = runner.timed("correction", {**base, "final": str(final), "file": str(files[-1])},
                                        scale=scale)
        st["startup"] = runner.timed("startup", {**base, "final": str(final)}, scale=scale, max_runs=1)
    if arrivals and (ready / "history.sqlite").exists():
        st["arrivals"] = runner.timed("arrivals", {**base, "ready": str(ready), "file": str(files[-1])},
                                      scale=scale, max_runs=1)
        if st["arrivals"].get("watch_peak_rss_mb"):
            st["arrivals"]["peak_rss_mb"] = max(st["arrivals"]["peak_rss_mb"], st["arrivals"]["watch_peak_rss_mb"])
    for path in (ready, final, snaps, data):
        shutil.rmtree(path, ignore_errors=True)
    return {"summary": summary, "generate_seconds": gen_s, "stages": st}


def _sec(stage: dict | None) -> float | None:
    return None if not stage or stage.get("seconds") is None else float(stage["seconds"])


def derive(scale_result: dict) -> dict:
    """Ratios and projections of one scale."""
    st = scale_result["stages"]
    d: dict = {}
    for kind in ("point", "intervals"):
        f, b = _sec(st.get(f"measures_fast_{kind}")), _sec(st.get(f"measures_baseline_{kind}"))
        d[f"measures_speedup_{kind}"] = b / f if f and b else None
    tilt, rej = st.get("pool_tilted"), st.get("pool_rejection")
    if tilt and rej and tilt.get("units") and rej.get("units"):
        tu, ru = tilt["units"], rej["units"]
        ess = sum(u["ess"] for u in tu)
        t_s = sum(u["seconds"] for u in tu)
        acc = sum(u["accepted"] for u in ru)
        r_s = sum(u["seconds"] for u in ru)
        target = 100_000
        t_match = sum(u["seconds"] * target / u["ess"] for u in tu if u["ess"] > 0)
        bound = any(u["accepted"] == 0 for u in ru)
        r_match = sum(u["seconds"] * target / max(u["accepted"], 1) for u in ru)
        per_unit = sorted((b["seconds"] * target / max(b["accepted"], 1)) / (a["seconds"] * target / a["ess"])
                          for a, b in zip(tu, ru) if a["ess"] > 0)
        z = [abs(a["expected_seats"] - b["expected_seats"]) / math.hypot(a["mc_se"], b["mc_se"])
             for a, b in zip(tu, ru) if b["accepted"] >= 100 and a["mc_se"] > 0 and b["mc_se"] > 0]
        d.update({
            "tilted_effective_draws_per_s": ess / t_s,
            "rejection_effective_draws_per_s": acc / r_s,
            "pool_draws_speedup_pooled": (ess / t_s) / (acc / r_s) if acc else None,
            "pool_draws_speedup": r_match / t_match,
            "pool_draws_speedup_is_lower_bound": bound,
            "pool_draws_speedup_per_unit_median": statistics.median(per_unit) if per_unit else None,
            "pool_draws_speedup_per_unit_min": per_unit[0] if per_unit else None,
            "tilted_seconds_per_unit_median": statistics.median(u["seconds"] for u in tu),
            "rejection_units_without_any_draw": sum(u["accepted"] == 0 for u in ru),
            "tilted_ess_min": min(u["ess"] for u in tu),
            "tilted_mc_se_median": statistics.median(u["mc_se"] for u in tu),
            "tilted_mc_se_max": max(u["mc_se"] for u in tu),
            "agreement_max_abs_z": max(z) if z else None,
            "agreement_units": len(z),
            "pool_sample_units": len(tu),
        })
    inc, noc = st.get("incremental"), st.get("flags_nochange")
    if inc and inc.get("steps") and noc and _sec(noc) is not None:
        per_group = (inc["steps"]["flags"] - noc["seconds"]) / max(inc.get("groups_computed") or 1, 1)
        history_groups = inc.get("groups_total", 0) - (inc.get("groups_computed") or 0)
        # a one-cycle recompute no slower than the no-change run is noise: no projection
        d["flags_full_projected"] = noc["seconds"] + per_group * history_groups if per_group > 0 else None
        d["flags_one_cycle"] = inc["steps"]["flags"]
    flags_full = _sec(st.get("flags_full"))
    d["full_rebuild_flags"] = "measured" if flags_full is not None else "projected"
    if flags_full is not None and d.get("flags_full_projected"):
        d["flags_projection_error"] = d["flags_full_projected"] / flags_full - 1
    flags_full = flags_full if flags_full is not None else d.get("flags_full_projected")
    d["flags_full_used"] = flags_full
    parts = [_sec(st.get("load_full")), _sec(st.get("compute_full")), flags_full, _sec(st.get("publish_full"))]
    if inc and _sec(inc) is not None and all(p is not None for p in parts[:3]):
        full = sum(p for p in parts if p is not None)
        d["full_rebuild"] = full
        d["full_rebuild_includes_publish"] = parts[3] is not None
        d["incremental_fraction"] = inc["seconds"] / full
        no_flags_inc = inc["seconds"] - inc["steps"]["flags"]
        no_flags_full = full - flags_full
        d["incremental_fraction_without_flags"] = no_flags_inc / no_flags_full if no_flags_full else None
        if inc["steps"].get("publish") is not None and _sec(st.get("publish_full")):
            d["republish_vs_naive"] = inc["steps"]["publish"] / st["publish_full"]["seconds"]
    corr = _sec(st.get("correction"))
    if corr is not None and d.get("full_rebuild"):
        d["correction_fraction"] = corr / d["full_rebuild"]
    weight = (st.get("publish_full") or {}).get("weight")
    if weight:
        d["site_budget_ratio"], d["page_budget_ratio"] = weight["site_budget_ratio"], weight["page_budget_ratio"]
        d["site_weight"] = weight
    d["peak_rss_mb"] = max((s.get("peak_rss_mb") or 0) for s in st.values())
    d["peak_rss_stage"] = max(st, key=lambda k: st[k].get("peak_rss_mb") or 0)
    return d


def calibrate_flags(results: dict) -> None:
    """Where the full flags were not run, correct the projection from the one-cycle recompute by
    the measured/projected ratio at the largest scale where both exist, and redo the sums."""
    both = [s for s in sorted(results, key=float)
            if results[s]["derived"].get("flags_projection_error") is not None]
    if not both:
        return
    ref = both[-1]
    factor = 1.0 / (1.0 + results[ref]["derived"]["flags_projection_error"])
    for s, r in results.items():
        d, st = r["derived"], r["stages"]
        if d.get("full_rebuild_flags") != "projected" or d.get("flags_full_projected") is None:
            continue
        d["flags_full_used"] = d["flags_full_projected"] * factor
        d["full_rebuild_flags"] = f"projected, calibrated at x{ref}"
        parts = [_sec(st.get("load_full")), _sec(st.get("compute_full")), d["flags_full_used"],
                 _sec(st.get("publish_full"))]
        inc = st.get("incremental")
        if inc and _sec(inc) is not None and None not in parts[:3]:
            full = sum(p for p in parts if p is not None)
            d["full_rebuild"] = full
            d["incremental_fraction"] = inc["seconds"] / full
            if _sec(st.get("correction")) is not None:
                d["correction_fraction"] = _sec(st["correction"]) / full
            rest = full - d["flags_full_used"]
            d["incremental_fraction_without_flags"] = (inc["seconds"] - inc["steps"]["flags"]) / rest if rest else None


def source_digest() -> str:
    """sha256 over the project's Python sources (to notice code changing during a run)."""
    import hashlib

    h = hashlib.sha256()
    for path in sorted([*REPO.glob("monitor/**/*.py"), *REPO.glob("store/**/*.py"), *REPO.glob("site/**/*")]):
        if path.is_file():
            h.update(path.relative_to(REPO).as_posix().encode())
            h.update(path.read_bytes())
    return h.hexdigest()


def slope(xs: list[float], ys: list[float]) -> float | None:
    pts = [(math.log(x), math.log(y)) for x, y in zip(xs, ys) if x and y and y > 0]
    if len(pts) < 2:
        return None
    mx = sum(p[0] for p in pts) / len(pts)
    my = sum(p[1] for p in pts) / len(pts)
    sxx = sum((p[0] - mx) ** 2 for p in pts)
    return sum((p[0] - mx) * (p[1] - my) for p in pts) / sxx if sxx else None


GROWTH_STAGES = ("load_full", "compute_full", "flags_one_cycle", "flags_full_used", "publish_full",
                 "incremental", "correction", "full_rebuild")
#: the stages whose peak RSS should grow sub-linearly with the history
RSS_STAGES = ("load_full", "compute_full", "flags_full", "publish_full", "incremental", "correction")


def growth(results: dict) -> dict:
    scales = sorted(results, key=float)
    out = {}
    for name in GROWTH_STAGES:
        xs, ys = [], []
        for s in scales:
            r = results[s]
            y = _sec(r["stages"].get(name)) if name in r["stages"] else r["derived"].get(name)
            if y is not None:
                xs.append(r["summary"]["contests"])
                ys.append(y)
        out[name] = {"slope": slope(xs, ys), "contests": xs, "seconds": ys}
    for name in RSS_STAGES:
        xs, ys = [], []
        for s in scales:
            r = results[s]
            mb = (r["stages"].get(name) or {}).get("peak_rss_mb")
            if mb:
                xs.append(r["summary"]["contests"])
                ys.append(mb)
        out[f"rss {name}"] = {"slope": slope(xs, ys), "contests": xs, "peak_rss_mb": ys}
    return out


def _fmt(x, digits=2):
    if x is None:
        return "-"
    if isinstance(x, float):
        if x != 0 and (abs(x) >= 1000 or abs(x) < 0.01):
            return f"{x:.3g}"
        return f"{x:.{digits}f}"
    return str(x)


def table(results: dict, growth_fit: dict) -> tuple[list[str], list[dict]]:
    lines = []
    scales = sorted(results, key=float)
    names = []
    for s in scales:
        for n in results[s]["stages"]:
            if n not in names:
                names.append(n)
    head = f"{'stage':<26}" + "".join(f"{'x' + format(float(s), 'g') + ' s':>11}{'MB':>7}{'n':>3}" for s in scales)
    lines += ["Timed stages (median seconds, peak RSS MB, runs):", head, "-" * len(head)]
    for n in names:
        row = f"{n:<26}"
        for s in scales:
            e = results[s]["stages"].get(n)
            if not e:
                row += f"{'':>11}{'':>7}{'':>3}"
                continue
            sec = e.get("seconds")
            row += f"{(_fmt(sec) if sec is not None else 'fail'):>11}{e.get('peak_rss_mb', 0):>7.0f}{e.get('runs', 1):>3}"
        lines.append(row)
    for n, label in (("flags_full_projected", "flags_full (projected)"), ("flags_full_used", "flags_full (used)"),
                     ("full_rebuild", "full_rebuild (sum)")):
        row = f"{label:<26}"
        for s in scales:
            row += f"{_fmt(results[s]['derived'].get(n)):>11}{'':>7}{'':>3}"
        lines.append(row)
    lines.append("")
    # targets
    checks = []
    one = results.get("1") or results.get(str(max(float(s) for s in scales)))
    ref_scale = "1" if "1" in results else scales[-1]

    def check(name, value, goal, op, note=""):
        if value is None:
            verdict = "not measured"
        else:
            met = value >= goal if op == ">=" else value <= goal if op == "<=" else value < goal
            verdict = "met" if met else "MISSED"
        checks.append({"target": name, "measured": value, "goal": f"{op} {goal:g}", "verdict": verdict,
                       "note": note, "scale": ref_scale})

    d = one["derived"]
    check("measures, all incl. intervals: per-unit loop / fast", d.get("measures_speedup_intervals"), 20, ">=")
    check("measures, point values only: per-unit loop / fast", d.get("measures_speedup_point"), 20, ">=")
    check("expected seats: eff. draws/s tilted / rejection (matched ESS)", d.get("pool_draws_speedup"), 50, ">=",
          "lower bound" if d.get("pool_draws_speedup_is_lower_bound") else "")
    check("incremental cycle / full rebuild", d.get("incremental_fraction"), 0.10, "<=",
          f"full flags {d.get('full_rebuild_flags')}")
    check("incremental / full rebuild, flags left out", d.get("incremental_fraction_without_flags"), 0.10, "<=")
    check("one state's corrected file / full rebuild", d.get("correction_fraction"), 1 / 30, "<=",
          f"correction {_fmt(_sec(one['stages'].get('correction')))} s")
    before = FLAGS_FULL_BEFORE.get(ref_scale)
    flags_now = _sec(one["stages"].get("flags_full"))
    check("full flags: before issue 17 (recorded) / now", before / flags_now if before and flags_now else None,
          4, ">=", f"{before} s recorded, {_fmt(flags_now)} s now")
    for name in GROWTH_STAGES:
        g = growth_fit.get(name, {})
        check(f"growth slope {name} (x{scales[0]}..x{scales[-1]})", g.get("slope"), 1.2, "<=",
              f"{len(g.get('seconds', []))} scales")
    su = one["stages"].get("startup") or {}
    heavy = sorted({m for k in ("help", "status", "flags") for m in su.get(f"{k}_imports", [])})
    check("levelfield --help start-up (s)", su.get("help_seconds"), 0.3, "<",
          f"status {_fmt(su.get('status_seconds'))} s, flags {_fmt(su.get('flags_seconds'))} s; "
          f"heavy imports: {', '.join(heavy) or 'none'}")
    arr = one["stages"].get("arrivals") or {}
    if arr.get("files"):
        checks.append({"target": f"{arr['files']} state files one by one (watch --once)", "measured": arr.get("seconds"),
                       "goal": "reported", "verdict": "measured", "scale": ref_scale,
                       "note": f"median {_fmt(arr.get('per_file_median'))} s, max {_fmt(arr.get('per_file_max'))} s "
                               f"per file (1 s of it the settle wait); {arr.get('failed')} failed"})
    for name in RSS_STAGES:
        g = growth_fit.get(f"rss {name}", {})
        check(f"peak RSS growth slope {name}", g.get("slope"), 1.0, "<", f"{len(g.get('peak_rss_mb', []))} scales")
    check("peak RSS of every stage at x1 (MB)", results["1"]["derived"]["peak_rss_mb"] if "1" in results else None,
          1024, "<", results["1"]["derived"]["peak_rss_stage"] if "1" in results else "")
    w = d.get("site_weight") or {}
    check("site weight / budget (60 MB), full publish", d.get("site_budget_ratio"), 1.0, "<=",
          f"{_fmt((w.get('site_bytes') or 0) / 1e6)} MB in {w.get('site_files')} files" if w else "")
    check("largest HTML page / budget (300 KB)", d.get("page_budget_ratio"), 1.0, "<=",
          f"{w.get('largest_page')} {_fmt((w.get('largest_page_bytes') or 0) / 1e3)} KB; "
          f"{w.get('pages_over_budget')} of {w.get('html_pages')} pages over" if w else "")
    lines.append("Targets (scale x%s unless noted):" % ref_scale)
    lines.append(f"{'target':<66}{'measured':>11}{'goal':>10}  verdict")
    for c in checks:
        lines.append(f"{c['target']:<66}{_fmt(c['measured']):>11}{c['goal']:>10}  {c['verdict']}"
                     + (f" ({c['note']})" if c["note"] else ""))
    lines.append("")
    lines.append("Monte Carlo (scale x%s): expected seats min ESS %s, mc_se median %s max %s seats; "
                 "tilted vs rejection max |z| %s over %s units; nulls percentile se median %s max %s" % (
                     ref_scale, _fmt(d.get("tilted_ess_min")), _fmt(d.get("tilted_mc_se_median"), 4),
                     _fmt(d.get("tilted_mc_se_max"), 4), _fmt(d.get("agreement_max_abs_z")),
                     d.get("agreement_units"), _fmt(one["stages"].get("nulls", {}).get("percentile_se_median"), 4),
                     _fmt(one["stages"].get("nulls", {}).get("percentile_se_max"), 4)))
    lines.append("effective draws/s (x%s): tilted %s, rejection %s (pooled ratio %s)" % (
        ref_scale, _fmt(d.get("tilted_effective_draws_per_s")), _fmt(d.get("rejection_effective_draws_per_s")),
        _fmt(d.get("pool_draws_speedup_pooled"))))
    return lines, checks


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(prog="python -m bench", description=__doc__)
    parser.add_argument("--quick", action="store_true", help="scale x0.25 only, one run per stage (smoke test)")
    parser.add_argument("--scales", help="comma-separated scales, e.g. 0.25,0.5,1,2")
    parser.add_argument("--workdir", help="where to write the synthetic files and stores (default: a temp dir)")
    parser.add_argument("--keep", action="store_true", help="keep the work folder")
    parser.add_argument("--complete", action="store_true",
                        help="baselines and pool stages at every scale (default: at x1 only; --quick: x0.25)")
    parser.add_argument("--measure-flags-up-to", type=float, default=1.0, metavar="SCALE",
                        help="run the full flags for real up to this scale (beyond it the earlier cycles' "
                             "pool rows are seeded cheaply and the full flags time is projected)")
    parser.add_argument("--arrivals-at", type=float, default=None, metavar="SCALE",
                        help="the scale of the 50-state-files scenario (default x1; --quick: x0.25)")
    parser.add_argument("--budget-minutes", type=float, default=38.0,
                        help="after 85%% of this, every stage runs once")
    parser.add_argument("--out", default=str(RESULTS), help="JSON results file")
    opts = parser.parse_args(argv)
    scales = [0.25] if opts.quick and not opts.scales else (
        [float(s) for s in opts.scales.split(",")] if opts.scales else list(DEFAULT_SCALES))
    work = Path(opts.workdir) if opts.workdir else Path(tempfile.mkdtemp(prefix="levelfield-bench-"))
    work.mkdir(parents=True, exist_ok=True)
    started = dt.datetime.now(dt.timezone.utc)
    runner = Runner(opts.quick, opts.budget_minutes * 60)
    info = machine()
    digest_start = source_digest()
    print(f"levelfield bench: scales {', '.join(f'x{s:g}' for s in scales)}{' (quick)' if opts.quick else ''}; "
          f"{info['nproc']} CPU ({info['cpu']}), {info['ram_gib']} GiB, Python {info['python']}", flush=True)
    results = {}
    try:
        complete_at = scales[0] if opts.quick else (1.0 if 1.0 in scales else scales[-1])
        for s in scales:
            arrivals_at = opts.arrivals_at if opts.arrivals_at is not None else complete_at
            r = run_scale(runner, s, work / f"x{s:g}", complete=opts.complete or s == complete_at,
                          real_flags=s <= opts.measure_flags_up_to, arrivals=s == arrivals_at)
            r["derived"] = derive(r)
            results[f"{s:g}"] = r
    finally:
        if not opts.keep:
            shutil.rmtree(work, ignore_errors=True)
    calibrate_flags(results)
    fit = growth(results)
    digest_end = source_digest()
    lines, checks = table(results, fit)
    total = runner.elapsed()
    print()
    print("\n".join(lines))
    loads = [e.get("loadavg_1min_max", 0) for e in runner.log]
    print(f"\nbench finished in {total / 60:.1f} min ({'quick' if opts.quick else 'full'} run); "
          f"1-min load average during the stages: median {statistics.median(loads) if loads else 0:.1f}, "
          f"max {max(loads) if loads else 0:.1f} on {info['nproc']} CPUs"
          + (" (other work competed for the CPUs: times are inflated)" if loads and statistics.median(loads)
             > (info['nproc'] or 1) + 0.5 else ""))
    if digest_end != digest_start:
        print("WARNING: the sources under monitor/, store/ or site/ changed during this run; "
              "stages measured different code")
    out = {
        "started": started.isoformat(timespec="seconds"), "seconds": total, "quick": opts.quick,
        "machine": info, "scales": scales, "source_sha256": {"start": digest_start, "end": digest_end}, "results": results, "growth": fit, "targets": checks,
        "table": lines, "constants": {
            "seats_effective_draws": 100_000, "null_draws": 10_000, "interval_draws": "levelfield.toml default",
            "rejection_seconds_cap_per_unit": __import__("bench.stages", fromlist=["x"]).REJECTION_SECONDS,
            "seeded_pool_draws_before_new_cycle": __import__("bench.stages", fromlist=["x"]).SEED_DRAWS,
            "flags_full_before_issue_17_seconds": FLAGS_FULL_BEFORE,
        },
    }
    Path(opts.out).parent.mkdir(parents=True, exist_ok=True)
    Path(opts.out).write_text(json.dumps(out, indent=1, default=str), encoding="utf-8")
    print(f"results written to {opts.out}")
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
