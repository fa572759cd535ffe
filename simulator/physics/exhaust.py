"""Exhaust (leaving) loss of the last stage and the used-energy end point.

The kinetic energy of the steam leaving the last row, and the losses of the
exhaust hood, are not converted to work.  The loss is read from the machine's
curve of loss versus annulus velocity ``V = m v / A`` and added to the
expansion-line end point (ELEP) to give the used-energy end point (UEEP):

.. math::  h_{UEEP} = h_{ELEP} + L \\cdot 0.87 \\cdot (1 - y)(1 - 0.65 y)

with ``L`` the exhaust loss per unit of dry flow [J/kg] and ``y`` the moisture
fraction at the ELEP (the published form writes ``(1 - 0.01 Y)(1 - 0.0065 Y)``
with ``Y`` in percent).  Shaft work is ``m (h_in - h_UEEP)``; the condenser
receives steam at ``h_UEEP``.

Reference: R. C. Spencer, K. C. Cotton and C. N. Cannon, "A method for
predicting the performance of steam turbine-generators ... 16,500 kW and
larger", Trans. ASME J. Eng. Power 85(4), 249-301, 1963.  The coefficients
0.87 and 0.0065 are quoted from memory of that paper's UEEP relation.

Interpolating the loss curve
    ``"linear"`` (the default) joins the curve's points by straight lines: the
    loss is continuous but its slope jumps at every point, so the output
    against back pressure has kinks there and a correction curve drawn from
    it has corners.  ``"pchip"`` is the piecewise cubic Hermite interpolant
    whose slopes are chosen to preserve the shape of the data (F. N. Fritsch
    and R. E. Carlson, "Monotone piecewise cubic interpolation", SIAM J.
    Numer. Anal. 17(2), 238-246, 1980; as built by
    :class:`scipy.interpolate.PchipInterpolator`): it passes through every
    point, its slope is continuous, it is monotone wherever the data are and
    flat at a local extremum of the data, so it never invents a minimum or
    overshoot between points as a cubic spline can (an exhaust-loss curve has
    a minimum near its design velocity and rises steeply at choking).
    Outside the curve both hold the end values.
"""

from __future__ import annotations

import bisect
from collections.abc import Sequence

__all__ = ["annulus_velocity", "exhaust_loss", "exhaust_loss_pchip", "pchip_pieces",
           "INTERPOLATIONS", "used_energy_end_point"]

#: ways of interpolating an exhaust-loss curve (see the module docstring)
INTERPOLATIONS = ("linear", "pchip")


def annulus_velocity(m_dot: float, v: float, area: float) -> float:
    """Axial velocity through the last-stage annulus, ``m v / A`` [m/s].

    Parameters
    ----------
    m_dot : mass flow [kg/s]
    v : specific volume at the expansion-line end point [m^3/kg]
    area : annulus area of the last row [m^2]
    """
    return m_dot * v / area


def exhaust_loss(velocity: float, curve_velocity: Sequence[float],
                 curve_loss: Sequence[float]) -> float:
    """Exhaust loss [J/kg dry flow] from the machine's curve by linear interpolation.

    Held at the end values outside the curve; the curve should span the
    velocities of interest (typically 60-350 m/s).
    """
    xs, ys = curve_velocity, curve_loss
    if velocity <= xs[0]:
        return float(ys[0])
    if velocity >= xs[-1]:
        return float(ys[-1])
    k = bisect.bisect_right(xs, velocity)
    t = (velocity - xs[k - 1]) / (xs[k] - xs[k - 1])
    return float(ys[k - 1] + t * (ys[k] - ys[k - 1]))


def pchip_pieces(curve_velocity: Sequence[float],
                 curve_loss: Sequence[float]) -> list[tuple[float, float, float, float]]:
    """The cubic of each interval of the shape-preserving interpolant (Fritsch and
    Carlson 1980, see the module docstring) of a loss curve.

    Parameters
    ----------
    curve_velocity : annulus velocities of the curve, increasing [m/s]
    curve_loss : exhaust losses at those velocities [J/kg]

    Returns
    -------
    list of tuple
        ``(a, b, c, d)`` per interval ``k``: ``loss = ((a t + b) t + c) t + d``
        with ``t = V - curve_velocity[k]`` [J/kg per (m/s)^3, (m/s)^2, m/s; J/kg].
    """
    from scipy.interpolate import PchipInterpolator

    c = PchipInterpolator(list(curve_velocity), list(curve_loss)).c
    return [tuple(float(c[i, k]) for i in range(4)) for k in range(c.shape[1])]


def exhaust_loss_pchip(velocity: float, curve_velocity: Sequence[float],
                       pieces: Sequence[tuple[float, float, float, float]]) -> float:
    """Exhaust loss [J/kg dry flow] from the curve's shape-preserving cubic pieces
    (:func:`pchip_pieces`); held at the end values outside the curve.

    Parameters
    ----------
    velocity : annulus velocity [m/s]
    curve_velocity : the curve's velocities, increasing [m/s]
    pieces : :func:`pchip_pieces` of the curve [-]
    """
    xs = curve_velocity
    if velocity <= xs[0]:
        return float(pieces[0][3])
    if velocity >= xs[-1]:
        a, b, c, d = pieces[-1]
        t = xs[-1] - xs[-2]
        return float(((a * t + b) * t + c) * t + d)
    k = bisect.bisect_right(xs, velocity) - 1
    a, b, c, d = pieces[k]
    t = velocity - xs[k]
    return float(((a * t + b) * t + c) * t + d)


def used_energy_end_point(h_elep: float, loss: float, y: float) -> float:
    """Used-energy end point [J/kg] from the ELEP, the exhaust loss and moisture.

    Parameters
    ----------
    h_elep : expansion-line end point enthalpy [J/kg]
    loss : exhaust loss from the curve [J/kg]
    y : moisture fraction at the ELEP [-]

    Spencer, Cotton & Cannon, Trans. ASME J. Eng. Power 85, 1963 (see module).
    """
    return h_elep + loss * 0.87 * (1.0 - y) * (1.0 - 0.65 * y)
