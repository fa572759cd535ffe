"""Make the INVENTED demo readings of this folder (run from the project folder:
``python measurements/make_demo_data.py``).

The "true machine" is the demo reheat unit (models/demo_reheat_unit.toml, itself
invented) with known changes; each reading is its model value plus normal noise
with the standard deviation its map states (95 % uncertainty over 1.96), from a
fixed seed, so the files are reproducible.

* acceptance_test.csv: three load points; HP1 efficiency 2.5 points below design,
  HP8 TTD 1.5 K above design; the cold-reheat flow meter FT-202 reads 6 % high
  (a damaged flow element).
* online_year.csv: daily averages over a year (2025); HP1 efficiency falls
  linearly by 2 points over the year; FT-202 drifts from 0 to +8 % (a fouling
  flow element); load and condenser pressure vary by day and season.
"""

from __future__ import annotations

import copy
import datetime as dt
import math
from pathlib import Path

import numpy as np
import partload
from partload.plant.case import design_conditions, override
from partload.solve.point import solve_point

HERE = Path(__file__).resolve().parent
# the unit each reading is written in: (unit, SI value -> written value)
UNITS = {"mass_flow": ("kg/s", lambda x: x), "temperature": ("degC", lambda x: x - 273.15),
         "pressure": ("bar", lambda x: x / 1e5), "power": ("MW", lambda x: x / 1e6)}
SETS = {"throttle_flow": lambda r: r.totals["throttle_flow"],
        "throttle_temperature": lambda r: r.totals["throttle_temperature"],
        "reheat_temperature": lambda r: r.node("hot_reheat")["T"],
        "exhaust_pressure": lambda r: r.node("condenser")["p"]}


def machine(hp1_loss: float, ttd_rise: float):
    model = partload.load_model(HERE.parent / "models" / "demo_reheat_unit.toml")
    m = copy.deepcopy(model)
    m.solver_cache.clear()
    next(g for g in m.groups if g.name == "HP1").eta_dry_design -= hp1_loss
    m.heaters["HP8"].ttd += ttd_rise
    return m


def reading(r, tag) -> float:
    if tag.sets:
        return SETS[tag.sets](r)
    group, item, column = tag.quantity
    if group == "totals":
        return r.totals[column]
    return r.table(group)[item][column]


def write(map_file: str, label: str, rows: list[tuple[str, list[float]]], note: str) -> None:
    meas_tags = read_tags(map_file)
    units = [("kPa", lambda x: x / 1e3) if t.sets == "exhaust_pressure" else UNITS[t.dimension]
             for t in meas_tags]
    header = [label] + [f"{t.name} [{u[0]}]" for t, u in zip(meas_tags, units)]
    lines = [f"# INVENTED readings for demonstration only ({note}); made by make_demo_data.py",
             ",".join(header)]
    lines += [",".join([lab] + [f"{u[1](x):.6g}" for x, u in zip(values, units)])
              for lab, values in rows]
    data = read_toml(map_file)["data"]
    (HERE / data).write_text("\n".join(lines) + "\n")


def read_toml(map_file: str) -> dict:
    import tomllib

    return tomllib.loads((HERE / map_file).read_text())


def read_tags(map_file: str):
    """The map's tags, read without its CSV file (which this script writes)."""
    from partload.measure.tags import read_tags as read

    model = partload.load_model(HERE.parent / "models" / "demo_reheat_unit.toml")
    return read(read_toml(map_file), model, map_file)


def noisy(tags, r, rng, bias: dict) -> list[float]:
    out = []
    for t in tags:
        x = reading(r, t)
        x += rng.standard_normal() * t.sigma(x)
        out.append(x * bias.get(t.name, 1.0))
    return out


def acceptance() -> None:
    tags = read_tags("acceptance_test.toml")
    m = machine(0.025, 1.5)
    rng = np.random.default_rng(2025)
    rows = []
    for label, frac, p_ex in (("T1-100%", 1.0, 6.9e3), ("T2-80%", 0.8, 6.7e3),
                              ("T3-60%", 0.6, 6.5e3)):
        r = solve_point(m, override(design_conditions(m), throttle_flow=280.0 * frac,
                                    exhaust_pressure=p_ex), check_limits=False)
        rows.append((label, noisy(tags, r, rng, {"FT-202": 1.06})))
    write("acceptance_test.toml", "point", rows, "acceptance test")


def online() -> None:
    tags = read_tags("online_year.toml")
    rng = np.random.default_rng(365)
    rows = []
    start = dt.date(2025, 1, 1)
    prev = None
    for day in range(365):
        f = day / 364
        m = machine(0.02 * f, 0.0)
        load = float(np.clip(0.8 + 0.15 * math.sin(2 * math.pi * day / 7)
                             + 0.05 * rng.standard_normal(), 0.55, 1.0))
        p_ex = 6.8e3 + 2.0e3 * math.sin(2 * math.pi * (day - 100) / 365)
        cond = override(design_conditions(m), throttle_flow=280.0 * load, exhaust_pressure=p_ex)
        r = solve_point(m, cond, check_limits=False)
        prev = r
        rows.append(((start + dt.timedelta(days=day)).isoformat(),
                     noisy(tags, r, rng, {"FT-202": 1.0 + 0.08 * f})))
    assert prev is not None
    write("online_year.toml", "date", rows, "a year of daily averages")


if __name__ == "__main__":
    acceptance()
    online()
