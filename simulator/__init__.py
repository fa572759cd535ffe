"""partload: off-design steam-turbine performance.

Calibrate a model of a steam turbine and its feedwater heaters to the design
heat balance, then predict stage pressures, bleed flows, output and heat rate
at other operating points.

Quick use::

    import partload
    model = partload.load_model("models/demo_reheat_unit.toml")
    r = partload.point(model, throttle_flow_fraction=0.6)
    print(r.totals["generator_output"])  # [W]

    case = partload.load_case("cases/reheat_part_load.toml")
    r = partload.point(case, exhaust_pressure=9e3)           # [Pa]
    path, summary = partload.run_study("cases/reheat_load_sweep.toml", limit=10)
    data = partload.open_result(path)                        # StudyData, SI

The functions are in :mod:`partload.api`.  Everything inside is SI: Pa, K,
J/kg, J/(kg K), m^3/kg, kg/s, W.

Names are imported on first use, so ``import partload`` loads neither the
solver nor h5py, matplotlib or Dask.
"""

from __future__ import annotations

import importlib

from .errors import (  # noqa: E402
    ConvergenceError,
    InfeasibleError,
    InputError,
    PartloadError,
    PropertyRangeError,
    ResultFileError,
    SolveError,
    TopologyError,
)
from .version import __version__  # noqa: E402

# public name -> module that holds it (imported on first access, PEP 562)
_LAZY = {
    "load_model": ".api",
    "load_case": ".api",
    "point": ".api",
    "run_study": ".api",
    "open_result": ".api",
    "open_dataset": ".api",
    "to_dataframe": ".api",
    "correction_curves": ".api",
    "StudyOutcome": ".api",
    "read_measurements": ".api",
    "reconcile_measurements": ".api",
    "fit_measurements": ".api",
    "trend_measurements": ".api",
    "point_as_tested": ".api",
    "band_as_tested": ".api",
    "Conditions": ".plant.case",
    "Case": ".plant.case",
    "Model": ".plant.model",
    "PointResult": ".solve.point",
    "solve_point": ".solve.point",
}

__all__ = [
    "__version__", "load_model", "load_case", "point", "run_study", "open_result",
    "open_dataset", "to_dataframe", "correction_curves", "StudyOutcome",
    "read_measurements", "reconcile_measurements", "fit_measurements",
    "trend_measurements", "point_as_tested", "band_as_tested", "Conditions", "Case", "Model",
    "PointResult", "solve_point",
    "PartloadError", "InputError", "TopologyError", "SolveError", "ConvergenceError",
    "InfeasibleError", "PropertyRangeError", "ResultFileError",
]


def __getattr__(name: str):
    module = _LAZY.get(name)
    if module is None:
        raise AttributeError(f"module {__name__!r} has no attribute {name!r}")
    value = getattr(importlib.import_module(module, __name__), name)
    globals()[name] = value  # later lookups skip this function
    return value


def __dir__() -> list[str]:
    return sorted(set(globals()) | set(_LAZY))
