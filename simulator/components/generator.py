"""Generator and shaft losses (:func:`simulator.physics.generator.generator_output`)."""

from __future__ import annotations

from dataclasses import dataclass
from typing import ClassVar

from ..physics.generator import generator_output
from .base import Component, ReadContext, Tunable

__all__ = ["Generator"]


@dataclass
class Generator(Component):
    """rating [W]; mechanical_loss, fixed_loss and load_loss_rated [W] (the load loss
    at rating, growing with output squared); stated_output [W] the heat balance's
    design output, if given (compared in ``partload check``)."""

    table: ClassVar[str] = "generator"
    many: ClassVar[bool] = False
    required: ClassVar[bool] = True
    title: ClassVar[str] = "generator"
    tunables: ClassVar[tuple[Tunable, ...]] = (
        Tunable("fixed_loss", "fixed_loss", "W", "losses independent of output", 0.0),
    )

    rating: float
    mechanical_loss: float = 0.0
    fixed_loss: float = 0.0
    load_loss_rated: float = 0.0
    stated_output: float | None = None
    name: str = "generator"

    @classmethod
    def read(cls, gen, ctx: ReadContext):
        rating = gen.quantity("rating", "power", positive=True)
        mech = gen.quantity("mechanical_loss", "power", default=0.0, lo=0.0)
        fixed = gen.quantity("fixed_loss", "power", default=0.0, lo=0.0)
        load_loss = gen.quantity("load_loss", "power", default=0.0, lo=0.0)
        stated = gen.quantity("design_output", "power", default=None, positive=True)
        gen.finish()
        if rating and None not in (mech, fixed, load_loss) and mech + fixed + load_loss >= rating:
            gen.problems.add(gen.where.child("mechanical_loss").error(
                f"the losses (mechanical {mech / 1e6:.4g} MW, fixed {fixed / 1e6:.4g} MW, load "
                f"{load_loss / 1e6:.4g} MW) add up to the rating {rating / 1e6:.4g} MW or more"))
        if None in (rating, mech, fixed, load_loss):
            return None
        return cls(rating, mech, fixed, load_loss, stated)

    def output(self, shaft_power: float) -> float:
        """Electrical output [W] at shaft power ``shaft_power`` [W]."""
        return generator_output(shaft_power, self.mechanical_loss, self.fixed_loss,
                                self.load_loss_rated, self.rating)
