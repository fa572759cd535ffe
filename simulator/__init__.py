"""partload: off-design steam-turbine performance.

Calibrate a model of a steam turbine and its feedwater heaters to the design
heat balance, then predict stage pressures, bleed flows, output and heat rate
at other operating points.

Quick use::

    from simulator import load_model, Conditions, solve_point
    model = load_model("models/demo_reheat_unit.toml")
    result = solve_point(model, Conditions(throttle_flow=0.6 * model.throttle.flow))
    print(result.totals["generator_output"])  # [W]

Everything inside is SI: Pa, K, J/kg, J/(kg K), m^3/kg, kg/s, W.
"""

__version__ = "0.1.0"

import importlib  # noqa: E402
from typing import TYPE_CHECKING  # noqa: E402

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

if TYPE_CHECKING:  # pragma: no cover
    from .plant.case import Conditions, load_case
    from .plant.model import Model, load_model
    from .solve.point import PointResult, solve_point

# imported on first use, so that a light subpackage (the result store) does not
# load the model and the solver
_LAZY = {"Conditions": ".plant.case", "load_case": ".plant.case", "Model": ".plant.model",
         "load_model": ".plant.model", "PointResult": ".solve.point",
         "solve_point": ".solve.point"}


def __getattr__(name: str):
    if name in _LAZY:
        value = getattr(importlib.import_module(_LAZY[name], __name__), name)
        globals()[name] = value
        return value
    raise AttributeError(f"module {__name__!r} has no attribute {name!r}")


def __dir__():
    return sorted(set(globals()) | set(_LAZY))


__all__ = [
    "__version__", "Conditions", "load_case", "load_model", "Model", "PointResult",
    "solve_point", "PartloadError", "InputError", "TopologyError", "SolveError",
    "ConvergenceError", "InfeasibleError", "PropertyRangeError", "ResultFileError",
]
