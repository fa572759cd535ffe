"""Generator output from shaft power, with mechanical and electrical losses.

.. math::  P_{el} = P_{shaft} - L_{mech} - L_{fixed} - L_{load} (P_{el} / P_{rated})^2

``L_mech`` (bearings, oil pumps on the shaft) and ``L_fixed`` (core, windage,
excitation) are constant; ``L_load`` (copper losses) grows with the square of
the current, i.e. of the output at constant power factor and voltage.  The
equation is quadratic in ``P_el`` and solved in closed form.

Reference: common practice for utility generators (IEEE Std 115 groups losses
as constant and load-dependent parts); the split comes from the rated losses
in the model file.
"""

from __future__ import annotations

import math

__all__ = ["generator_output"]


def generator_output(P_shaft: float, mechanical_loss: float, fixed_loss: float,
                     load_loss_rated: float, rating: float) -> float:
    """Electrical output [W] for shaft power ``P_shaft`` [W].

    Parameters
    ----------
    P_shaft : turbine shaft power [W]
    mechanical_loss : mechanical losses [W], constant
    fixed_loss : constant generator losses [W]
    load_loss_rated : load-dependent generator losses at rated output [W]
    rating : rated electrical output [W]
    """
    net = P_shaft - mechanical_loss - fixed_loss
    if load_loss_rated <= 0.0:
        return net
    a = load_loss_rated / (rating * rating)
    disc = 1.0 + 4.0 * a * net
    if disc <= 0.0:  # far below any real operating point; keep a smooth continuation
        return net
    return (math.sqrt(disc) - 1.0) / (2.0 * a)
