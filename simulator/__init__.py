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
from .plant.case import Conditions, load_case  # noqa: E402
from .plant.model import Model, load_model  # noqa: E402
from .solve.point import PointResult, solve_point  # noqa: E402

__all__ = [
    "__version__", "Conditions", "load_case", "load_model", "Model", "PointResult",
    "solve_point", "PartloadError", "InputError", "TopologyError", "SolveError",
    "ConvergenceError", "InfeasibleError", "PropertyRangeError", "ResultFileError",
]
