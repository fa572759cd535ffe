"""Measured plant data: read tagged readings, reconcile them with the model
(VDI 2048), fit the declared tunables, and track them over time."""

from .fit import FitResult, fit, reconcile
from .gls import Reconciled, reconcile_linear
from .tags import Measurements, Tag, read_measurements

__all__ = ["FitResult", "fit", "reconcile", "Reconciled", "reconcile_linear", "Measurements",
           "Tag", "read_measurements"]
