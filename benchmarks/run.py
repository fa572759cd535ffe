"""partload benchmark: point times, an hourly year, scaling, and comparisons.

Run from the project root::

    python benchmarks/run.py            # everything, a few minutes on 2 cores
    python benchmarks/run.py --quick    # smaller samples, for a smoke test

It prints a table and writes ``results/benchmark.json`` holding, for every
target, the measured value, the target, and a ``met`` flag.  Timings are wall
clock on this machine; medians over repeated points.
"""

from __future__ import annotations

import argparse
import json
import math
import os
import platform
import statistics
import subprocess
import sys
import tempfile
import time
from pathlib import Path

import numpy as np
from scipy.optimize import fsolve

ROOT = Path(__file__).resolve().parent.parent
sys.path.insert(0, str(ROOT))

from partload import __version__  # noqa: E402
from partload.plant.case import Conditions  # noqa: E402
from partload.plant.model import build_model, load_model  # noqa: E402
from partload.plant.synthetic import synthetic_model_data  # noqa: E402
from partload.solve.newton import newton  # noqa: E402
from partload.solve.point import TOL, equations_for, solve_point  # noqa: E402
from partload.steam.if97 import get_backend  # noqa: E402

MODEL = ROOT / "models" / "demo_reheat_unit.toml"


class CountingTables:
    """A property backend that counts its calls (used only to count, not to time)."""

    def __init__(self, inner):
        self.inner = inner
        self.calls = 0
        self.name = inner.name + "+counted"

    def __getattr__(self, attr):
        f = getattr(self.inner, attr)
        if not callable(f):
            return f

        def counted(*args):
            self.calls += 1
            return f(*args)

        setattr(self, attr, counted)
        return counted


def _load_fractions(n: int) -> np.ndarray:
    return np.linspace(0.45, 1.0, n)


def bench_points(quick: bool) -> dict:
    """Cold and warm points of the demo reheat unit with its heater train."""
    model = load_model(MODEL)
    m_d = model.throttle.flow
    n = 15 if quick else 60
    fr = _load_fractions(n)
    cold = []
    cold_it = []
    cold_ev = []
    for f in fr:
        t = time.perf_counter()
        r = solve_point(model, Conditions(throttle_flow=f * m_d))
        cold.append(time.perf_counter() - t)
        cold_it.append(r.iterations)
        cold_ev.append(r.evaluations + 1)
    warm = []
    warm_it = []
    warm_ev = []
    prev = solve_point(model, Conditions(throttle_flow=fr[0] * m_d))
    fine = np.linspace(fr[0], 1.0, 4 * n)[1:]
    for f in fine:
        t = time.perf_counter()
        r = solve_point(model, Conditions(throttle_flow=f * m_d), neighbour=prev)
        warm.append(time.perf_counter() - t)
        warm_it.append(r.iterations)
        warm_ev.append(r.evaluations + 1)
        prev = r
    # property calls per point, counted in a separate run (counting costs time)
    counter = CountingTables(get_backend("seuif97"))
    calls_cold = []
    for f in fr[:5]:
        counter.calls = 0
        solve_point(model, Conditions(throttle_flow=f * m_d), counter)
        calls_cold.append(counter.calls)
    prev = solve_point(model, Conditions(throttle_flow=fine[0] * m_d), counter)
    calls_warm = []
    for f in fine[1:21]:
        counter.calls = 0
        prev = solve_point(model, Conditions(throttle_flow=f * m_d), counter, neighbour=prev)
        calls_warm.append(counter.calls)
    return {
        "cold_ms": 1e3 * statistics.median(cold),
        "cold_iterations": statistics.median(cold_it),
        "cold_evaluations": statistics.median(cold_ev),
        "cold_property_calls": statistics.median(calls_cold),
        "warm_ms": 1e3 * statistics.median(warm),
        "warm_iterations": statistics.median(warm_it),
        "warm_evaluations": statistics.median(warm_ev),
        "warm_property_calls": statistics.median(calls_warm),
        "points": {"cold": len(cold), "warm": len(warm)},
    }


def bench_profile(quick: bool) -> dict:
    """The 8,760-hour profile end to end, HDF5 included, on 1 and 2 workers."""
    case = ROOT / "cases" / "reheat_hourly_profile.toml"
    out = {}
    if not case.exists():
        return {"error": f"{case.relative_to(ROOT)} not found"}
    for workers in (1, 2):
        with tempfile.TemporaryDirectory() as tmp:
            target = Path(tmp) / "profile.h5"
            cmd = [sys.executable, "-m", "partload.cli", "study", str(case), "--workers",
                   str(workers), "--output", str(target)]
            if quick:
                cmd += ["--limit", "876"]
            # peak memory of the study process and its workers: time -v is not on
            # every machine, so the child reports its own and its children's maxrss
            wrapper = ("import resource, runpy, sys; sys.argv = ['partload'] + sys.argv[1:]; "
                       "code = 0\n"
                       "try:\n    runpy.run_module('partload.cli', run_name='__main__')\n"
                       "except SystemExit as e:\n    code = e.code or 0\n"
                       "s = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss\n"
                       "c = resource.getrusage(resource.RUSAGE_CHILDREN).ru_maxrss\n"
                       "print('PEAK_KB', s, c, file=sys.stderr)\nsys.exit(code)")
            t = time.perf_counter()
            proc = subprocess.run([sys.executable, "-c", wrapper, *cmd[3:]], cwd=ROOT,
                                  capture_output=True, text=True, timeout=900,
                                  env={**os.environ, "PYTHONPATH": str(ROOT)})
            wall = time.perf_counter() - t
            peak = None
            for line in proc.stderr.splitlines():
                if line.startswith("PEAK_KB"):
                    _, s_kb, c_kb = line.split()
                    # upper bound of the total: the study process plus each worker at
                    # the largest worker's peak (ru_maxrss of children is their maximum)
                    peak = (int(s_kb) + (workers * int(c_kb) if workers > 1 else 0)) / 1024.0
            out[f"workers_{workers}"] = {
                "wall_s": wall, "returncode": proc.returncode, "peak_memory_mb": peak,
                "points": 876 if quick else 8760,
                "file_mb": target.stat().st_size / 2**20 if target.exists() else None,
                "stderr_tail": proc.stderr.strip().splitlines()[-3:],
            }
    return out


def bench_scaling(quick: bool) -> dict:
    """Time per point on synthetic networks of growing size."""
    sizes = [10, 20, 50, 100, 200]
    rows = []
    for n in sizes:
        model = build_model(synthetic_model_data(n), file=f"synthetic-{n}")
        m_d = model.throttle.flow
        t = time.perf_counter()
        prev = solve_point(model, Conditions(throttle_flow=0.7 * m_d))
        cold = time.perf_counter() - t
        warm = []
        count = 10 if quick else 30
        for f in np.linspace(0.7, 0.95, count + 1)[1:]:
            t = time.perf_counter()
            prev = solve_point(model, Conditions(throttle_flow=f * m_d), neighbour=prev)
            warm.append(time.perf_counter() - t)
        rows.append({"groups": len(model.groups), "unknowns": len(prev.x),
                     "cold_ms": 1e3 * cold, "warm_ms": 1e3 * statistics.median(warm)})
    g = np.log([r["groups"] for r in rows])
    warm_exp = float(np.polyfit(g, np.log([r["warm_ms"] for r in rows]), 1)[0])
    cold_exp = float(np.polyfit(g, np.log([r["cold_ms"] for r in rows]), 1)[0])
    return {"rows": rows, "warm_exponent": warm_exp, "cold_exponent": cold_exp}


def bench_compare(quick: bool) -> dict:
    """Default Newton path against scipy's fsolve, and seuif97 against iapws."""
    model = load_model(MODEL)
    m_d = model.throttle.flow
    steam = get_backend("seuif97")
    fr = np.linspace(0.5, 0.9, 21 if quick else 81)
    ours, theirs, their_res = [], [], []
    prev = solve_point(model, Conditions(throttle_flow=fr[0] * m_d))
    for f in fr[1:]:
        cond = Conditions(throttle_flow=f * m_d)
        eq = equations_for(model, cond, steam)
        # both start where the default path starts: the neighbour scaled to this flow
        # plus the secant step along the load
        x0 = eq.scaled_guess(prev.x, prev.flow_ratio)
        if prev.x_slope is not None:
            x0 = x0 + prev.x_slope * (eq.flow_ratio() - prev.flow_ratio)
        t = time.perf_counter()
        nr = newton(eq.residuals, x0, tol=TOL, jacobian=prev.jacobian)
        ours.append(time.perf_counter() - t)
        t = time.perf_counter()
        xs = fsolve(eq.residuals, x0, xtol=1e-13)
        theirs.append(time.perf_counter() - t)
        their_res.append(float(np.max(np.abs(eq.residuals(xs)))))
        prev = solve_point(model, cond, neighbour=prev)
        assert np.max(np.abs(nr.x - prev.x)) < 1e-8
    sample = np.linspace(0.6, 0.62, 4)
    t_seu, t_iap = [], []
    p_seu = solve_point(model, Conditions(throttle_flow=0.598 * m_d))
    p_iap = solve_point(model, Conditions(throttle_flow=0.598 * m_d), "iapws")
    for f in sample:
        cond = Conditions(throttle_flow=f * m_d)
        t = time.perf_counter()
        p_seu = solve_point(model, cond, "seuif97", neighbour=p_seu)
        t_seu.append(time.perf_counter() - t)
        t = time.perf_counter()
        p_iap = solve_point(model, cond, "iapws", neighbour=p_iap)
        t_iap.append(time.perf_counter() - t)
    agree = float(np.max(np.abs(p_seu.node_p / p_iap.node_p - 1.0)))
    return {
        "newton_ms": 1e3 * statistics.median(ours), "fsolve_ms": 1e3 * statistics.median(theirs),
        "fsolve_ratio": statistics.median(theirs) / statistics.median(ours),
        "fsolve_worst_residual": max(their_res),
        "seuif97_ms": 1e3 * statistics.median(t_seu), "iapws_ms": 1e3 * statistics.median(t_iap),
        "iapws_ratio": statistics.median(t_iap) / statistics.median(t_seu),
        "backends_pressure_agreement": agree,
    }


def _target(name, value, target, smaller_is_better=True, unit=""):
    met = (value is not None and not math.isnan(value)
           and (value <= target if smaller_is_better else value >= target))
    if value is None:
        miss = "not measured"
    elif met:
        miss = ""
    elif smaller_is_better:
        miss = f"missed by {value - target:.3g} {unit} ({value / target:.2f}x the target)"
    else:
        miss = f"missed by {target - value:.3g} {unit} ({value / target:.2f}x the target)"
    return {"name": name, "value": value, "target": target, "unit": unit,
            "comparison": "<=" if smaller_is_better else ">=", "met": bool(met), "miss": miss}


def main(argv=None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--quick", action="store_true", help="smaller samples (smoke test)")
    ap.add_argument("--skip-profile", action="store_true", help="leave out the hourly year")
    ap.add_argument("--output", default=str(ROOT / "results" / "benchmark.json"))
    args = ap.parse_args(argv)
    t0 = time.perf_counter()
    report = {"software_version": __version__, "python": platform.python_version(),
              "machine": platform.machine(), "cpus": os.cpu_count(), "quick": args.quick,
              "created": time.strftime("%Y-%m-%dT%H:%M:%S%z")}
    print("points ...", flush=True)
    report["points"] = bench_points(args.quick)
    print("scaling ...", flush=True)
    report["scaling"] = bench_scaling(args.quick)
    print("comparisons ...", flush=True)
    report["comparisons"] = bench_compare(args.quick)
    if not args.skip_profile:
        print("hourly profile ...", flush=True)
        report["profile"] = bench_profile(args.quick)
    pts, sc, cmp_ = report["points"], report["scaling"], report["comparisons"]
    prof = report.get("profile", {})
    w2 = prof.get("workers_2", {})
    targets = [
        _target("warm point, median", pts["warm_ms"], 2.0, unit="ms"),
        _target("cold point, median", pts["cold_ms"], 20.0, unit="ms"),
        _target("8,760-point profile on 2 workers with HDF5", w2.get("wall_s"), 20.0, unit="s")
        if not (args.quick or args.skip_profile) else None,
        _target("scaling exponent 10-200 groups (warm points)", sc["warm_exponent"], 1.3),
        _target("peak memory of the profile", w2.get("peak_memory_mb"), 400.0, unit="MB")
        if not (args.quick or args.skip_profile) else None,
        _target("fsolve time / ours (warm points)", cmp_["fsolve_ratio"], 3.0, False, "x"),
        _target("iapws backend time / seuif97 (warm points)", cmp_["iapws_ratio"], 300.0,
                False, "x"),
    ]
    report["targets"] = [t for t in targets if t is not None]
    report["benchmark_seconds"] = time.perf_counter() - t0
    out = Path(args.output)
    out.parent.mkdir(parents=True, exist_ok=True)
    out.write_text(json.dumps(report, indent=2))
    print()
    print(f"{'target':48s} {'measured':>12s} {'target':>10s}  met")
    for t in report["targets"]:
        v = "-" if t["value"] is None else f"{t['value']:.3g}"
        print(f"{t['name']:48s} {v:>12s} {t['comparison']}{t['target']:>9g}  "
              f"{'yes' if t['met'] else 'NO  ' + t['miss']}")
    print()
    print(f"cold point: {pts['cold_iterations']} iterations, {pts['cold_evaluations']} residual "
          f"evaluations, {pts['cold_property_calls']} property calls")
    print(f"warm point: {pts['warm_iterations']} iterations, {pts['warm_evaluations']} residual "
          f"evaluations, {pts['warm_property_calls']} property calls")
    print("scaling (groups: cold ms / warm ms): " + ", ".join(
        f"{r['groups']}: {r['cold_ms']:.1f} / {r['warm_ms']:.2f}" for r in sc["rows"])
        + f"; exponents cold {sc['cold_exponent']:.2f}, warm {sc['warm_exponent']:.2f}")
    print(f"fsolve worst residual {cmp_['fsolve_worst_residual']:.2e}; backends agree on "
          f"pressures to {cmp_['backends_pressure_agreement']:.1e}")
    for k, v in prof.items():
        if isinstance(v, dict):
            print(f"profile {k}: {v['points']} points in {v['wall_s']:.1f} s, peak "
                  f"{v['peak_memory_mb']} MB, exit {v['returncode']}")
    print(f"wrote {out} ({report['benchmark_seconds']:.0f} s)")
    return 0


if __name__ == "__main__":
    sys.exit(main())
