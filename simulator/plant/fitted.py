"""Fitted ("as tested") model files: the design model with fitted constants.

A fitted model file (written by :func:`simulator.measure.tested.write_as_tested`)
names the design model it was fitted from (path relative to itself, and its
SHA-256) and the value of each fitted tunable::

    basis = "as tested"
    design_model = "../models/demo_reheat_unit.toml"
    design_model_sha256 = "..."

    [tunables."stage_group.HP1.efficiency"]
    value = 0.8172

:func:`load_as_tested` reads it as a calibrated :class:`~simulator.plant.model.Model`:
the design model calibrated to its heat balance, then each tunable set to its
fitted value.  :func:`~simulator.plant.model.load_model` reads either kind of
file, so a case file may name a fitted model like a design one.  The model
remembers what was fitted (:attr:`Model.fitted`), so that a study's workers,
which build the model from its text, set the same values
(:func:`apply_fitted`), and its SHA-256 covers them, so that a study file
solved with other fitted values is not resumed with these.
"""

from __future__ import annotations

import hashlib
from dataclasses import dataclass
from pathlib import Path

from ..components.registry import KINDS
from ..errors import InputError
from ..inputs.reading import closest, load_toml
from ..units import Where

__all__ = ["BASIS", "TunableRef", "apply_fitted", "fitted_text", "is_as_tested",
           "load_as_tested", "resolve_tunable"]

#: the basis a fitted model file states
BASIS = "as tested"


@dataclass(frozen=True)
class TunableRef:
    """A declared tunable of one component: ``key`` as a file writes it."""

    key: str
    component: object
    tunable: object

    @property
    def design(self) -> float:
        return float(getattr(self.component, self.tunable.attribute))


def resolve_tunable(model, key, w: Where) -> TunableRef:
    """The tunable ``key`` (``TABLE.NAME.TUNABLE`` or ``TABLE.TUNABLE``) of ``model``."""
    if not isinstance(key, str) or "." not in key:
        raise w.error(f"expected a tunable such as 'stage_group.HP1.efficiency', got {key!r}")
    table, rest = key.split(".", 1)
    kind = KINDS.get(table)
    if kind is None or not kind.tunables:
        known = [t for t, k in KINDS.items() if k.tunables]
        raise w.error(f"no kind with tunables called {table!r}; known: {', '.join(known)}"
                      + closest(table, known))
    if kind.many:
        if "." not in rest:
            raise w.error(f"write a tunable of {table} as '{table}.NAME.TUNABLE', not {key!r}")
        name, tname = rest.rsplit(".", 1)
        comps = {c.name: c for c in model.of_kind(kind)}
        if name not in comps:
            raise w.error(f"the model has no {kind.title or table} {name!r}"
                          + closest(name, comps))
        comp = comps[name]
    else:
        tname = rest
        comps = model.of_kind(kind)
        if not comps:
            raise w.error(f"the model has no [{table}]")
        comp = comps[0]
    tunables = {t.name: t for t in kind.tunables}
    if tname not in tunables:
        raise w.error(f"{table} declares no tunable {tname!r}; known: {', '.join(tunables)}"
                      + closest(tname, tunables))
    return TunableRef(key, comp, tunables[tname])


def fitted_text(fitted, sep: str = "; ") -> str:
    """Fitted values ``(key, value)`` as ``KEY = VALUE`` items joined by ``sep``, each
    value written in full (as a fitted model file and a study file store it)."""
    return sep.join(f"{k} = {v!r}" for k, v in fitted)


def is_as_tested(data: dict) -> bool:
    """Whether TOML ``data`` is a fitted model file."""
    return isinstance(data, dict) and data.get("basis") == BASIS and "design_model" in data


def apply_fitted(model, fitted, file: str = "<fitted model>"):
    """Set each tunable of ``fitted`` (``(key, value)`` pairs [unit of the tunable])
    on the calibrated design ``model``; name it "... (as tested)", keep ``fitted``
    in :attr:`Model.fitted` and let its SHA-256 cover the values.  Returns ``model``.

    Raises
    ------
    InputError
        An unknown tunable (``file`` and the tunable's table named).
    """
    fitted = tuple((str(k), float(v)) for k, v in fitted)
    for key, value in fitted:
        ref = resolve_tunable(model, key, Where(file, f"tunables.{key}"))
        setattr(ref.component, ref.tunable.attribute, value)
    design_sha = model.sha256
    model.fitted = fitted
    model.sha256 = hashlib.sha256("".join(
        [design_sha, "\n"] + [fitted_text([kv]) + "\n" for kv in fitted]).encode()).hexdigest()
    model.name = f"{model.name} ({BASIS})"
    model.description = (f"{model.description}. AS TESTED: constants fitted to measured data "
                         f"({file}), not the design values")
    model.solver_cache.clear()
    return model


def load_as_tested(path: str | Path, steam=None):
    """Read a fitted model file: the design model, calibrated, with the fitted
    constants put in.

    Parameters
    ----------
    path : the fitted model file (TOML) [-]
    steam : property backend for the calibration (default: the model's) [-]

    Returns
    -------
    Model
        Named "<design name> (as tested)", its fitted values in ``fitted``.

    Raises
    ------
    InputError
        Not a fitted model file, a design model changed since the fit, or an
        unknown or out-of-range tunable (file, table and key named).
    """
    from .model import build_model

    path = Path(path)
    file = str(path)
    data, _ = load_toml(path)
    if not is_as_tested(data):
        raise InputError(f"not a fitted model file (expected basis = {BASIS!r} and "
                         f"design_model)", file=file, key="basis")
    if not isinstance(data["design_model"], str):
        raise Where(file, None, "design_model").error("expected a path relative to this file")
    target = path.parent / data["design_model"]
    if not target.is_file():
        raise Where(file, None, "design_model").error(
            f"the design model {str(target)!r} is not there")
    design, text = load_toml(target)
    if is_as_tested(design):  # checked before reading it: a file naming itself loops
        raise Where(file, None, "design_model").error(
            "names a fitted model file; name the design model it was fitted from")
    model = build_model(design, text=text, file=str(target), steam=steam)
    want = data.get("design_model_sha256")
    # the digest of the text read, as Model.sha256 and the fit's writer have it (a
    # file with CRLF line ends reads as the same text)
    if want is not None and want != model.sha256:
        raise Where(file, None, "design_model_sha256").error(
            f"the design model {str(target)!r} changed since the fit; fit again")
    tables = data.get("tunables", {})
    if not isinstance(tables, dict):
        raise Where(file, "tunables").error("expected tables [tunables.\"KEY\"]")
    fitted = []
    for key, t in tables.items():
        w = Where(file, f"tunables.{key}")
        ref = resolve_tunable(model, key, w)
        if not isinstance(t, dict) or not isinstance(t.get("value"), (int, float)):
            raise w.child("value").error("expected a number")
        value = float(t["value"])
        if not ref.tunable.lo <= value <= ref.tunable.hi:
            raise w.child("value").error(f"{value!r} is outside {ref.tunable.lo}..."
                                         f"{ref.tunable.hi} [{ref.tunable.unit}]")
        fitted.append((key, value))
    model = apply_fitted(model, fitted, file)
    model.fitted_file = file
    return model
