"""Pressure-drop behaviour shared by kinds on the steam path: valves wide open
and lines whose drop scales with ``m^2 v``
(:func:`simulator.physics.pressure_drop.scaled_pressure_drop`).

These are mixins: a kind's dataclass inherits one and declares the fields it
reads (``dp_wide_open``, ``m_design``, ``v_design``, ``wide_open_fraction``;
or ``dp_design``, ``m_design``, ``v_design``).
"""

from __future__ import annotations

from ..errors import InputError
from ..physics.pressure_drop import DROP_LAWS, fraction_pressure_drop, scaled_pressure_drop

__all__ = ["WideOpenValve", "SquareLawDrop"]


class WideOpenValve:
    """A valve whose wide-open drop scales from its design value.

    ``wide_open_fraction`` [-] is the model file's ``wide_open_drop`` (``None``:
    the design drop from the node pressures, i.e. wide open at design).
    """

    def calibrate(self, m, p_in, h_in, p_out, steam, model) -> float:
        dp = p_in - p_out
        self.m_design, self.v_design = m, steam.v_ph(p_in, h_in)
        frac = self.wide_open_fraction
        self.dp_wide_open = dp if frac is None else frac * p_in
        if self.dp_wide_open > dp * (1 + 1e-12):
            raise InputError(
                f"the wide-open valve drop ({self.dp_wide_open / 1e5:.4g} bar) exceeds the "
                f"design drop from the node pressures ({dp / 1e5:.4g} bar)", file=model.file,
                table=self.where, key="wide_open_drop")
        return h_in

    def wide_open_drop(self, m_dot: float, v_in: float) -> float:
        """Pressure drop [Pa] of the valve wide open at ``m_dot`` [kg/s] and inlet
        volume ``v_in`` [m^3/kg]."""
        return scaled_pressure_drop(m_dot, v_in, self.dp_wide_open, self.m_design, self.v_design)


class SquareLawDrop:
    """A line (pipe, reheater) whose drop scales with ``m^2 v`` from design, or,
    with ``drop_law = "fixed_fraction"``, stays the design fraction of its inlet
    pressure (:data:`simulator.physics.pressure_drop.DROP_LAWS`)."""

    drop_law: str = DROP_LAWS[0]

    @staticmethod
    def read_drop_law(rr) -> str:
        """The table's ``pressure_drop_law`` (default the flow-squared law)."""
        return rr.string("pressure_drop_law", default=DROP_LAWS[0], choices=DROP_LAWS) or \
            DROP_LAWS[0]

    def calibrate_drop(self, m, p_in, h_in, p_out, steam) -> None:
        """Fix the design drop [Pa] at flow ``m`` [kg/s] and inlet ``(p_in, h_in)``."""
        self.dp_design, self.m_design, self.v_design = p_in - p_out, m, steam.v_ph(p_in, h_in)
        self.drop_fraction = (p_in - p_out) / p_in

    def line_drop(self, m_dot: float, p_in: float, h_in: float, steam) -> float:
        """Pressure drop [Pa] by the line's law at flow ``m_dot`` [kg/s] and inlet
        ``(p_in [Pa], h_in [J/kg])``."""
        if self.drop_law == "fixed_fraction":
            return fraction_pressure_drop(p_in, self.drop_fraction)
        return self.drop(m_dot, steam.v_ph(p_in, h_in))

    def drop(self, m_dot: float, v_in: float) -> float:
        """Pressure drop [Pa] at flow ``m_dot`` [kg/s] and inlet volume ``v_in`` [m^3/kg]."""
        return scaled_pressure_drop(m_dot, v_in, self.dp_design, self.m_design, self.v_design)
