"""Steam and water properties behind one small interface.

Every function takes and returns SI units: pressure ``p`` [Pa], temperature
``T`` [K], specific enthalpy ``h`` [J/kg], specific entropy ``s`` [J/(kg K)],
specific volume ``v`` [m^3/kg], steam quality ``x`` [-] (0 saturated liquid,
1 saturated or superheated vapour; for subcooled liquid 0).

Two backends implement the same formulation, IAPWS-IF97:

``"seuif97"`` (default)
    A compiled implementation; about a microsecond a call.
``"iapws"``
    The pure-Python reference implementation of the ``iapws`` package; about
    a millisecond a call.  Use it to cross-check a result.

Reference: W. Wagner et al., "The IAPWS Industrial Formulation 1997 for the
Thermodynamic Properties of Water and Steam", J. Eng. Gas Turbines Power
122(1), 150-182, 2000; IAPWS R7-97(2012).

Consistency: ``seuif97`` evaluates (p, h) and (p, s) states with the IF97
backward equations, which agree with the basic equations only to 10-25 mK
(from memory of IAPWS R7-97(2012))
and jump at sub-region boundaries and at the saturation line.  This module
adds one Newton step on the basic equation for single-phase states, so that
every function here is continuous and consistent with the basic equations to
about 1e-9 K (see :class:`Seuif97Tables`).

Validity (IAPWS R7-97(2012), section 1): 273.15 K <= T <= 1073.15 K at
p <= 100 MPa, and 1073.15 K < T <= 2273.15 K at p <= 50 MPa.  States outside
raise :class:`~simulator.errors.PropertyRangeError`.
"""

from __future__ import annotations

import math

from ..errors import InputError, PropertyRangeError
from .constants import H_ABOVE_SAT_VAP, P_CRIT, P_MAX, P_MIN, T_CRIT, T_MAX, T_MIN

__all__ = ["SteamTables", "MemoTables", "remembering", "get_backend", "BACKENDS", "P_MIN",
           "P_MAX", "T_MIN", "T_MAX", "P_CRIT", "T_CRIT"]

# seuif97 works in MPa and kJ/kg: the critical pressure and the enthalpy above every
# saturated vapour (see :mod:`simulator.steam.constants`) in those units
_P_CRIT_MPA = P_CRIT * 1e-6
_H_VAP_MAX_KJ = H_ABOVE_SAT_VAP * 1e-3


def _range_error(what: str, **state) -> PropertyRangeError:
    shown = ", ".join(f"{k} = {v:.6g}" for k, v in state.items())
    return PropertyRangeError(f"steam state outside IAPWS-IF97 validity for {what} ({shown}; "
                              f"SI units: Pa, K, J/kg, J/(kg K))")


class SteamTables:
    """Interface every backend implements (SI in, SI out)."""

    name = "abstract"

    def h_pT(self, p: float, T: float) -> float: ...
    def s_pT(self, p: float, T: float) -> float: ...
    def v_pT(self, p: float, T: float) -> float: ...
    def T_ph(self, p: float, h: float) -> float: ...
    def s_ph(self, p: float, h: float) -> float: ...
    def v_ph(self, p: float, h: float) -> float: ...
    def x_ph(self, p: float, h: float) -> float: ...
    def h_ps(self, p: float, s: float) -> float: ...

    def vs_ph(self, p: float, h: float) -> tuple[float, float]:
        """Specific volume and entropy at one (p, h) state (one lookup where possible)."""
        return self.v_ph(p, h), self.s_ph(p, h)

    def Tsx_ph(self, p: float, h: float) -> tuple[float, float, float]:
        """Temperature, entropy and quality at one (p, h) state."""
        return self.T_ph(p, h), self.s_ph(p, h), self.x_ph(p, h)
    def T_sat(self, p: float) -> float: ...
    def h_liq_sat(self, p: float) -> float: ...
    def h_vap_sat(self, p: float) -> float: ...
    def v_liq_sat(self, p: float) -> float: ...


class Seuif97Tables(SteamTables):
    """IAPWS-IF97 through the compiled ``seuif97`` package (MPa, degC, kJ/kg inside)."""

    name = "seuif97"

    def __init__(self):
        import seuif97

        self._pt = seuif97.pt
        self._ph = seuif97.ph
        self._ps = seuif97.ps
        self._px = seuif97.px

    # seuif97 returns large negative sentinels (-1000 ... -2200) when a state is
    # outside its range; every result is checked against that.
    def h_pT(self, p, T):
        if not (0.0 < p <= P_MAX and T_MIN <= T <= T_MAX):
            raise _range_error("h(p, T)", p=p, T=T)
        return self._pt(p * 1e-6, T - 273.15, 4) * 1e3

    def s_pT(self, p, T):
        if not (0.0 < p <= P_MAX and T_MIN <= T <= T_MAX):
            raise _range_error("s(p, T)", p=p, T=T)
        return self._pt(p * 1e-6, T - 273.15, 5) * 1e3

    def v_pT(self, p, T):
        if not (0.0 < p <= P_MAX and T_MIN <= T <= T_MAX):
            raise _range_error("v(p, T)", p=p, T=T)
        return self._pt(p * 1e-6, T - 273.15, 3)

    # ------------------------------------------------------------------------------
    # (p, h) and (p, s) states.  seuif97 evaluates them through the IF97 backward
    # equations T(p, h) and T(p, s), which agree with the basic equations only to
    # 10-25 mK and jump at sub-region boundaries and at the saturation line.  For
    # single-phase states one Newton step on the basic equation removes that
    # (T1 = T0 + (h - h(p, T0)) / c_p, or T0 (s - s(p, T0)) / c_p), leaving an
    # inconsistency of about 1e-9 K; two-phase states are computed by seuif97 from
    # the saturation properties and need no step.  Results are then continuous,
    # which Newton's method at 1e-10 needs.

    def _T_ph(self, p, h):
        """Where a (p, h) state lies; MPa and kJ/kg in, degC out.

        Returns ``(0, T)`` for a single-phase state with its temperature refined
        on the basic equation, ``(1, None)`` inside the two-phase region (seuif97
        is exact there), ``(2, x)`` for a two-phase state within the backward
        equations' uncertainty of the saturation line, with its quality from the
        saturation enthalpies (seuif97 may report the wrong phase there).
        """
        if not (P_MIN <= p * 1e6 <= P_MAX):
            raise _range_error("a (p, h) state", p=p * 1e6, h=h * 1e3)
        if h > _H_VAP_MAX_KJ:  # above every saturated-vapour enthalpy: superheated
            x = 1.0
        else:
            x = self._ph(p, h, 15)
            if 0.0 < x < 1.0:
                return 1, None
        t0 = self._ph(p, h, 1)
        if t0 <= -999.0 or t0 + 273.15 > T_MAX + 50.0:
            raise _range_error("a (p, h) state", p=p * 1e6, h=h * 1e3)
        pt = self._pt
        h0 = pt(p, t0, 4)
        if abs(h - h0) > 50.0:
            # the backward temperature fell on the other side of the saturation line
            # (it may err by 25 mK): the state lies within that of saturation.  Decide
            # the phase from the saturation enthalpies; a single-phase state steps
            # from just inside its phase and stays inside it.
            px = self._px
            if p < _P_CRIT_MPA:
                h_f, h_g = px(p, 0.0, 4), px(p, 1.0, 4)
                if h_f <= h <= h_g:
                    return 2, (h - h_f) / (h_g - h_f)
                x = 0.0 if h < h_f else 1.0
            t_sat = px(p, 0.0, 1)
            t0 = t_sat - 1e-6 if x <= 0.0 else t_sat + 1e-6
            t1 = t0 + (h - pt(p, t0, 4)) / pt(p, t0, 8)
            return 0, (min(t1, t0) if x <= 0.0 else max(t1, t0))
        t1 = t0 + (h - h0) / pt(p, t0, 8)
        if p < _P_CRIT_MPA and (t1 < t0 if x >= 1.0 else t1 > t0):
            # stepping toward saturation: stay at least 1e-6 K inside the phase, where
            # seuif97's choice of region is certain
            t_sat = self._px(p, 0.0, 1)
            t1 = max(t1, t_sat + 1e-6) if x >= 1.0 else min(t1, t_sat - 1e-6)
        return 0, t1

    def _mix(self, p, x, i):
        """Property ``i`` of a two-phase state of quality ``x`` at ``p`` [MPa]."""
        f = self._px(p, 0.0, i)
        return f + x * (self._px(p, 1.0, i) - f)

    def T_ph(self, p, h):
        P, H = p * 1e-6, h * 1e-3
        kind, t = self._T_ph(P, H)
        if kind == 0:
            return t + 273.15
        if kind == 2:
            return self._px(P, 0.0, 1) + 273.15
        return self._ph(P, H, 1) + 273.15

    def s_ph(self, p, h):
        P, H = p * 1e-6, h * 1e-3
        kind, t = self._T_ph(P, H)
        if kind == 0:
            return self._pt(P, t, 5) * 1e3
        if kind == 2:
            return self._mix(P, t, 5) * 1e3
        return self._ph(P, H, 5) * 1e3

    def v_ph(self, p, h):
        P, H = p * 1e-6, h * 1e-3
        kind, t = self._T_ph(P, H)
        if kind == 0:
            r = self._pt(P, t, 3)
        elif kind == 2:
            r = self._mix(P, t, 3)
        else:
            r = self._ph(P, H, 3)
        if r > 0.0:
            return r
        raise _range_error("v(p, h)", p=p, h=h)

    def vs_ph(self, p, h):
        """Specific volume [m^3/kg] and entropy [J/(kg K)] at one (p, h) state."""
        P, H = p * 1e-6, h * 1e-3
        kind, t = self._T_ph(P, H)
        if kind == 0:
            pt = self._pt
            return pt(P, t, 3), pt(P, t, 5) * 1e3
        if kind == 2:
            return self._mix(P, t, 3), self._mix(P, t, 5) * 1e3
        return self._ph(P, H, 3), self._ph(P, H, 5) * 1e3

    def Tsx_ph(self, p, h):
        """Temperature [K], entropy [J/(kg K)] and quality [-] at one (p, h) state."""
        P, H = p * 1e-6, h * 1e-3
        kind, t = self._T_ph(P, H)
        if kind == 0:
            # single phase: liquid at or below the saturated-liquid enthalpy
            x = 0.0 if P < _P_CRIT_MPA and H <= self._px(P, 0.0, 4) else 1.0
            return t + 273.15, self._pt(P, t, 5) * 1e3, x
        if kind == 2:
            return self._px(P, 0.0, 1) + 273.15, self._mix(P, t, 5) * 1e3, t
        return (self._ph(P, H, 1) + 273.15, self._ph(P, H, 5) * 1e3,
                self._ph(P, H, 15))

    def x_ph(self, p, h):
        if P_MIN <= p <= P_MAX:
            r = self._ph(p * 1e-6, h * 1e-3, 15)
            if r > -999.0:
                return r
        raise _range_error("x(p, h)", p=p, h=h)

    def h_ps(self, p, s):
        if P_MIN <= p <= P_MAX:
            P, S = p * 1e-6, s * 1e-3
            ps = self._ps
            x = ps(P, S, 15)
            if 0.0 < x < 1.0:
                r = ps(P, S, 4)
            else:
                t0 = ps(P, S, 1)
                if t0 <= -999.0:
                    raise _range_error("h(p, s)", p=p, s=s)
                pt = self._pt
                s0 = pt(P, t0, 5)
                near = abs(S - s0) > 0.1 and P < _P_CRIT_MPA
                r = None
                if near:
                    # backward temperature on the other side of saturation (see _T_ph):
                    # decide the phase from the saturation entropies
                    px = self._px
                    s_f, s_g = px(P, 0.0, 5), px(P, 1.0, 5)
                    if s_f < S < s_g:
                        h_f = px(P, 0.0, 4)
                        r = h_f + (S - s_f) / (s_g - s_f) * (px(P, 1.0, 4) - h_f)
                    else:
                        x = 0.0 if S <= s_f else 1.0
                        t_sat = px(P, 0.0, 1)
                        t0 = t_sat - 1e-6 if x <= 0.0 else t_sat + 1e-6
                        s0 = pt(P, t0, 5)
                if r is None:
                    t1 = t0 + (S - s0) * (t0 + 273.15) / pt(P, t0, 8)
                    if near:
                        t1 = min(t1, t0) if x <= 0.0 else max(t1, t0)
                    elif P < _P_CRIT_MPA and (t1 < t0 if x >= 1.0 else t1 > t0):
                        # stepping toward saturation: stay inside the phase (see _T_ph)
                        t_sat = self._px(P, 0.0, 1)
                        t1 = (max(t1, t_sat + 1e-6) if x >= 1.0
                              else min(t1, t_sat - 1e-6))
                    r = pt(P, t1, 4)
            if r > -999.0:
                return r * 1e3
        raise _range_error("h(p, s)", p=p, s=s)

    def T_sat(self, p):
        if P_MIN <= p < P_CRIT:
            return self._px(p * 1e-6, 0.0, 1) + 273.15
        raise _range_error("saturation temperature", p=p)

    def h_liq_sat(self, p):
        if P_MIN <= p < P_CRIT:
            return self._px(p * 1e-6, 0.0, 4) * 1e3
        raise _range_error("saturated liquid enthalpy", p=p)

    def h_vap_sat(self, p):
        if P_MIN <= p < P_CRIT:
            return self._px(p * 1e-6, 1.0, 4) * 1e3
        raise _range_error("saturated vapour enthalpy", p=p)

    def v_liq_sat(self, p):
        if P_MIN <= p < P_CRIT:
            return self._px(p * 1e-6, 0.0, 3)
        raise _range_error("saturated liquid volume", p=p)


class IapwsTables(SteamTables):
    """IAPWS-IF97 through the reference ``iapws`` package (MPa, K, kJ/kg inside)."""

    name = "iapws"

    def __init__(self):
        from iapws import IAPWS97

        self._IAPWS97 = IAPWS97

    def _state(self, what, **kw):
        try:
            st = self._IAPWS97(**kw)
        except (NotImplementedError, ValueError, TypeError, ZeroDivisionError,
                OverflowError) as exc:
            raise _range_error(what, **{k: v for k, v in kw.items()}) from exc
        if not getattr(st, "status", 1) or st.h is None or (isinstance(st.h, float)
                                                           and math.isnan(st.h)):
            raise _range_error(what, **kw)
        return st

    def _pT(self, p, T, what):
        if not (0.0 < p <= P_MAX and T_MIN <= T <= T_MAX):
            raise _range_error(what, p=p, T=T)
        return self._state(what, P=p * 1e-6, T=T)

    def _ph_state(self, p, h, what):
        if not (P_MIN <= p <= P_MAX):
            raise _range_error(what, p=p, h=h)
        return self._state(what, P=p * 1e-6, h=h * 1e-3)

    def h_pT(self, p, T):
        return self._pT(p, T, "h(p, T)").h * 1e3

    def s_pT(self, p, T):
        return self._pT(p, T, "s(p, T)").s * 1e3

    def v_pT(self, p, T):
        return self._pT(p, T, "v(p, T)").v

    def T_ph(self, p, h):
        return self._ph_state(p, h, "T(p, h)").T

    def s_ph(self, p, h):
        return self._ph_state(p, h, "s(p, h)").s * 1e3

    def v_ph(self, p, h):
        return self._ph_state(p, h, "v(p, h)").v

    def x_ph(self, p, h):
        return float(self._ph_state(p, h, "x(p, h)").x)

    def h_ps(self, p, s):
        if not (P_MIN <= p <= P_MAX):
            raise _range_error("h(p, s)", p=p, s=s)
        return self._state("h(p, s)", P=p * 1e-6, s=s * 1e-3).h * 1e3

    def _sat(self, p, x, what):
        if not (P_MIN <= p < P_CRIT):
            raise _range_error(what, p=p)
        return self._state(what, P=p * 1e-6, x=x)

    def T_sat(self, p):
        return self._sat(p, 0.0, "saturation temperature").T

    def h_liq_sat(self, p):
        return self._sat(p, 0.0, "saturated liquid enthalpy").h * 1e3

    def h_vap_sat(self, p):
        return self._sat(p, 1.0, "saturated vapour enthalpy").h * 1e3

    def v_liq_sat(self, p):
        return self._sat(p, 0.0, "saturated liquid volume").v


class MemoTables(SteamTables):
    """A backend that remembers its last answers: the same call with the same
    arguments returns the same float without asking ``inner`` again.

    One residual evaluation of a point asks for many identical states (a node's
    volume for each component leaving it, the saturation properties of a heater
    for its shell and its drain), and each column of a finite-difference
    Jacobian repeats every call upstream of the unknown it perturbs.  The answers
    are those of ``inner`` bit for bit; errors are not remembered.  Each method
    keeps at most ``size`` answers and starts afresh when full.

    Parameters
    ----------
    inner : the backend asked for answers not yet remembered [-]
    size : answers kept per method [-]
    """

    METHODS = ("h_pT", "s_pT", "v_pT", "T_ph", "s_ph", "v_ph", "x_ph", "h_ps", "vs_ph",
               "Tsx_ph", "T_sat", "h_liq_sat", "h_vap_sat", "v_liq_sat")

    def __init__(self, inner: SteamTables, size: int = 8192):
        self.inner = inner
        self.name = inner.name
        self._memos: list[dict] = []
        for method in self.METHODS:
            setattr(self, method, self._remembering(getattr(inner, method), size))

    def _remembering(self, f, size):
        memo: dict = {}
        self._memos.append(memo)
        get = memo.get

        def call(*args):
            r = get(args)
            if r is None:
                if len(memo) >= size:
                    memo.clear()
                r = memo[args] = f(*args)
            return r

        return call

    def clear(self) -> None:
        """Forget every remembered answer."""
        for memo in self._memos:
            memo.clear()


def remembering(steam: SteamTables) -> SteamTables:
    """``steam`` wrapped in a :class:`MemoTables` (itself when it already is one)."""
    return steam if isinstance(steam, MemoTables) else MemoTables(steam)


BACKENDS = {"seuif97": Seuif97Tables, "iapws": IapwsTables}
_cache: dict[str, SteamTables] = {}


def get_backend(name: str = "seuif97") -> SteamTables:
    """Return the property backend called ``name`` (see :data:`BACKENDS`)."""
    if name not in BACKENDS:
        raise InputError(f"unknown steam property backend {name!r}; valid: "
                         f"{', '.join(sorted(BACKENDS))}", key="backend")
    if name not in _cache:
        _cache[name] = BACKENDS[name]()
    return _cache[name]
