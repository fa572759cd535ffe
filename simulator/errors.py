"""The one exception hierarchy of partload.

Every error the tool raises on purpose derives from :class:`PartloadError`.
User mistakes (:class:`InputError` and below) carry the file, table and key
they refer to, so the command line can print one clear line without a
traceback.  Solver failures (:class:`SolveError` and below) say what was asked,
which limit was hit and where.

::

    PartloadError
    ├── InputError            bad model or case file (file, table, key)
    │   └── TopologyError     the stage-group graph is not a turbine
    ├── SolveError            a point that cannot be solved
    │   ├── ConvergenceError  Newton did not converge (iterations, residual, worst)
    │   ├── InfeasibleError   the request is beyond a limit of the machine
    │   └── PropertyRangeError  a state outside IAPWS-IF97 validity
    ├── ResultFileError       a result file that is not ours, damaged or in the way
    └── ClusterError          a Dask scheduler that cannot be reached, or was lost
"""

from __future__ import annotations

__all__ = [
    "PartloadError",
    "InputError",
    "TopologyError",
    "SolveError",
    "ConvergenceError",
    "InfeasibleError",
    "PropertyRangeError",
    "ResultFileError",
    "ClusterError",
]


class PartloadError(Exception):
    """Base of every error partload raises on purpose."""


class InputError(PartloadError):
    """A mistake in a model or case file.

    Parameters
    ----------
    message
        What is wrong, in the user's terms.
    file, table, key
        Where it is: the file path, the TOML table (dotted) and the key.
    """

    def __init__(self, message: str, file: str | None = None, table: str | None = None,
                 key: str | None = None):
        self.message = message
        self.file = file
        self.table = table
        self.key = key
        super().__init__(self.__str__())

    @property
    def where(self) -> str:
        parts = []
        if self.file:
            parts.append(str(self.file))
        if self.table:
            parts.append(f"[{self.table}]")
        if self.key:
            parts.append(f"{self.key}")
        return " ".join(parts)

    def __str__(self) -> str:
        where = self.where
        return f"{where}: {self.message}" if where else self.message


class TopologyError(InputError):
    """The graph of stage groups and nodes is not a valid turbine."""


class SolveError(PartloadError):
    """A point that could not be solved; the message says why and where."""


class ConvergenceError(SolveError):
    """Newton's method stopped without meeting the tolerance.

    Attributes
    ----------
    iterations
        Newton iterations taken [-].
    residual
        Largest normalised residual at the end [-].
    worst
        Name of the equation (node, heater, demand) with the largest residual.
    """

    def __init__(self, message: str, iterations: int, residual: float, worst: str):
        self.iterations = iterations
        self.residual = residual
        self.worst = worst
        super().__init__(
            f"{message} after {iterations} iterations; largest residual {residual:.3g} "
            f"at {worst}"
        )


class InfeasibleError(SolveError):
    """The request is beyond a limit of the machine (flow above valves wide open,
    output above maximum, a pressure ordering that cannot exist)."""


class PropertyRangeError(SolveError):
    """A steam state outside the validity range of IAPWS-IF97."""


class ResultFileError(PartloadError):
    """A result file that is damaged, written by another program, or in the way."""


class ClusterError(PartloadError):
    """A Dask scheduler that cannot be reached, or that was lost during a study
    (the finished points are kept; the study continues with ``--resume``)."""
