"""Thermal operating point: the core temperature at which loss and heat removal balance.

The core loss depends on temperature (the material's temperature data) and the
temperature on the loss. The operating point is the temperature reached when the part
warms up from ambient:

    T* = T_a + R_th * P(T*)        (first crossing of P(T) and the heat removal Q(T))

with P the core loss from the one loss engine (:func:`workbench.engine.loss_laws`, the
same laws :func:`workbench.engine.core_loss` evaluates) times the core volume, plus a
winding loss. The crossing is stable when the loop gain R_th dP/dT (generally
(dP/dT)/(dQ/dT)) is below 1. When P(T) stays above the heat removal all the way to the
material's limit temperature (Curie point, insulation class), there is no working
point: thermal runaway.

Heat removal (see :mod:`workbench.models.thermal`): a fixed thermal resistance, natural
convection plus radiation from a surface area, or the empirical handbook relation.

Everything here is an estimate of a surface temperature in still air; it must be
verified by measurement on the real part.
"""
from __future__ import annotations

import math
from collections.abc import Callable
from dataclasses import dataclass, field

import numpy as np

from workbench.checks import finite_number, positive_number
from workbench.jsonsafe import to_jsonable
from workbench.models import thermal as heat

__all__ = [
    "CAUTIONS",
    "Equilibrium",
    "FixedResistance",
    "HandbookCooling",
    "SurfaceCooling",
    "ThermalResult",
    "make_cooling",
    "max_ambient",
    "solve_equilibrium",
    "thermal_operating_point",
]

#: Shown with every thermal result (README, CLI, panel).
CAUTIONS = (
    "an estimate of the surface temperature in still air, to be verified by measurement on the real part "
    "in its real enclosure; the inside of a core or winding runs hotter than its surface",
    "hot cores and thermal runaway can burn people and ignite materials; keep a margin below the limit "
    "temperature and defer to local codes, safety standards and licensed practice",
)

_GRID_STEP = 1.0        # K between evaluations of the loss on the temperature grid
_LOWEST_AMBIENT = -40.0  # degC: lowest ambient searched for the ambient margin (common practice, no source)


# ---------------------------------------------------------------------------
# heat removal
# ---------------------------------------------------------------------------
@dataclass(frozen=True)
class FixedResistance:
    """Heat removal through a fixed surface-to-ambient thermal resistance.

    Parameters
    ----------
    r_th : float
        Thermal resistance [K/W].
    """

    r_th: float

    def __post_init__(self):
        _positive(self.r_th, "r_th", "K/W")

    def removed(self, temperature, ambient):
        """Heat removed at a surface temperature [W].

        Parameters
        ----------
        temperature : float or array_like
            Surface temperature [degC].
        ambient : float
            Ambient temperature [degC].

        Returns
        -------
        float or numpy.ndarray
            :math:`(T - T_a) / R_{th}` [W].
        """
        return (np.asarray(temperature, dtype=float) - ambient) / self.r_th

    def slope(self, temperature, ambient):
        """dQ/dT [W/K] (constant :math:`1/R_{th}`).

        Parameters
        ----------
        temperature : float or array_like
            Surface temperature [degC].
        ambient : float
            Ambient temperature [degC].

        Returns
        -------
        float or numpy.ndarray
            :math:`1/R_{th}` [W/K], shaped like ``temperature``.
        """
        if np.ndim(temperature) == 0:
            return 1.0 / self.r_th
        return np.full(np.shape(temperature), 1.0 / self.r_th)

    def describe(self) -> str:
        """One line for a report."""
        return f"fixed thermal resistance {self.r_th:.4g} K/W"

    def to_dict(self) -> dict:
        """Plain dict for JSON."""
        return {"kind": "fixed_resistance", "r_th_k_w": self.r_th}


@dataclass(frozen=True)
class SurfaceCooling:
    """Natural convection (Churchill-Chu) and radiation from the component's surface.

    Parameters
    ----------
    area : float
        Surface area exposed to still air [m^2].
    height : float, optional
        Characteristic height for the convection correlation [m]; default the edge of the
        cube with that surface area.
    emissivity : float
        Surface emissivity [-].
    """

    area: float
    height: float | None = None
    emissivity: float = heat.DEFAULT_EMISSIVITY

    def __post_init__(self):
        _positive(self.area, "surface_area", "m^2")
        if self.height is None:
            object.__setattr__(self, "height", float(heat.characteristic_height(self.area)))
        _positive(self.height, "height", "m")
        e = float(self.emissivity)
        if not (math.isfinite(e) and 0.0 <= e <= 1.0):
            raise ValueError(f"emissivity must lie in [0, 1]; got {self.emissivity!r}")

    def removed(self, temperature, ambient):
        """Heat removed at a surface temperature [W] (see :func:`surface_heat_loss`).

        Parameters
        ----------
        temperature : float or array_like
            Surface temperature [degC].
        ambient : float
            Ambient temperature [degC].

        Returns
        -------
        float or numpy.ndarray
            Convection plus radiation [W].
        """
        return heat.surface_heat_loss(temperature, ambient, self.area, self.height, self.emissivity)

    def slope(self, temperature, ambient):
        """dQ/dT [W/K].

        Parameters
        ----------
        temperature : float or array_like
            Surface temperature [degC].
        ambient : float
            Ambient temperature [degC].

        Returns
        -------
        float or numpy.ndarray
            Incremental conductance [W/K].
        """
        return heat.surface_heat_loss_slope(temperature, ambient, self.area, self.height, self.emissivity)

    def describe(self) -> str:
        """One line for a report."""
        return (f"natural convection (Churchill-Chu, vertical surface {self.height * 1e3:.3g} mm high) and "
                f"radiation (emissivity {self.emissivity:g}) from {self.area * 1e4:.4g} cm^2 in still air")

    def to_dict(self) -> dict:
        """Plain dict for JSON."""
        return {"kind": "convection_radiation", "surface_area_m2": self.area, "height_m": self.height,
                "emissivity": self.emissivity}


@dataclass(frozen=True)
class HandbookCooling:
    """Heat removal from the empirical handbook relation dT = (P[mW]/A[cm^2])^0.833.

    Parameters
    ----------
    area : float
        Outer surface area of the wound component [m^2].
    """

    area: float

    def __post_init__(self):
        _positive(self.area, "surface_area", "m^2")

    def removed(self, temperature, ambient):
        """Heat removed at a surface temperature [W] (see :func:`handbook_heat_loss`).

        Parameters
        ----------
        temperature : float or array_like
            Surface temperature [degC].
        ambient : float
            Ambient temperature [degC].

        Returns
        -------
        float or numpy.ndarray
            Heat flow [W].
        """
        return heat.handbook_heat_loss(np.asarray(temperature, dtype=float) - ambient, self.area)

    def slope(self, temperature, ambient):
        """dQ/dT [W/K].

        Parameters
        ----------
        temperature : float or array_like
            Surface temperature [degC].
        ambient : float
            Ambient temperature [degC].

        Returns
        -------
        float or numpy.ndarray
            Derivative of the handbook heat flow [W/K] (infinite at ambient).
        """
        dt = np.abs(np.asarray(temperature, dtype=float) - ambient)
        with np.errstate(divide="ignore"):
            out = self.area * 1e4 * 1e-3 / 0.833 * dt ** (1.0 / 0.833 - 1.0)
        return float(out) if np.ndim(out) == 0 else out

    def describe(self) -> str:
        """One line for a report."""
        return f"empirical handbook relation dT = (P[mW]/A[cm^2])^0.833 over {self.area * 1e4:.4g} cm^2"

    def to_dict(self) -> dict:
        """Plain dict for JSON."""
        return {"kind": "handbook", "surface_area_m2": self.area}


Cooling = FixedResistance | SurfaceCooling | HandbookCooling


def make_cooling(*, r_th=None, surface_area=None, height=None, emissivity=None, method="convection"):
    """Heat removal from a thermal resistance or a surface area (exactly one of them).

    Parameters
    ----------
    r_th : float, optional
        Surface-to-ambient thermal resistance [K/W].
    surface_area : float, optional
        Surface area in still air [m^2].
    height : float, optional
        Characteristic height for the convection correlation [m] (surface area only).
    emissivity : float, optional
        Surface emissivity [-] (surface area only; default 0.9).
    method : {"convection", "handbook"}
        With a surface area: convection plus radiation, or the empirical handbook relation.

    Returns
    -------
    FixedResistance, SurfaceCooling or HandbookCooling
    """
    if (r_th is None) == (surface_area is None):
        raise ValueError("give exactly one of r_th [K/W] and surface_area [m^2]; "
                         f"got r_th={r_th!r}, surface_area={surface_area!r}")
    if r_th is not None:
        if height is not None or emissivity is not None:
            raise ValueError("height and emissivity describe a surface area; they cannot be used with r_th")
        return FixedResistance(float(_positive(r_th, "r_th", "K/W")))
    if method == "handbook":
        if height is not None or emissivity is not None:
            raise ValueError("the handbook relation takes only the surface area; height and emissivity "
                             "belong to the convection method")
        return HandbookCooling(float(surface_area))
    if method != "convection":
        raise ValueError(f"method must be 'convection' or 'handbook'; got {method!r}")
    return SurfaceCooling(float(surface_area), None if height is None else float(height),
                          heat.DEFAULT_EMISSIVITY if emissivity is None else float(emissivity))


def _positive(value, name, unit):
    return positive_number(value, name, unit=unit)


def _finite(value, name, unit):
    return finite_number(value, name, unit=unit)


# ---------------------------------------------------------------------------
# the balance of heat: pure, on any P(T)
# ---------------------------------------------------------------------------
@dataclass(frozen=True)
class Equilibrium:
    """Where the loss P(T) meets the heat removal Q(T) when warming up from ambient.

    Attributes
    ----------
    temperature : float or None
        Operating temperature [degC]; None when there is none below the limit (runaway).
    power : float or None
        Dissipation at the operating temperature [W].
    loop_gain : float or None
        (dP/dT) / (dQ/dT) at the operating point [-] (R_th dP/dT for a fixed resistance).
    stable : bool
        True when an operating point exists and its loop gain is below 1.
    runaway : bool
        True when no stable operating point lies at or below the limit.
    escape_temperature : float or None
        Next crossing above the operating point, where P overtakes Q again [degC]:
        a core pushed above it (a transient, a hotter neighbour) runs away. None when Q
        stays above P up to the limit.
    ambient, limit : float
        Ambient and limit temperature [degC].
    grid_temperature, grid_power, grid_removed : numpy.ndarray
        The curves on the evaluation grid from ambient to the limit [degC, W, W].
    """

    temperature: float | None
    power: float | None
    loop_gain: float | None
    stable: bool
    runaway: bool
    escape_temperature: float | None
    ambient: float
    limit: float
    grid_temperature: np.ndarray = field(repr=False)
    grid_power: np.ndarray = field(repr=False)
    grid_removed: np.ndarray = field(repr=False)


def _grid(low, high, step=_GRID_STEP):
    n = max(int(math.ceil((high - low) / step)), 8) + 1
    return np.linspace(low, high, n)


def _evaluate(power, temps):
    out = np.array([float(power(float(t))) for t in temps])
    if not np.all(np.isfinite(out)) or np.any(out < 0):
        i = int(np.argmax(~np.isfinite(out) | (out < 0)))
        raise ValueError(f"the loss at {temps[i]:.4g} degC is {out[i]!r} W: expected a finite, "
                         "non-negative power")
    return out


def _brentq(fun, a, b):
    from scipy.optimize import brentq

    return float(brentq(fun, a, b, xtol=1e-10, rtol=4 * np.finfo(float).eps, maxiter=200))


def solve_equilibrium(power: Callable[[float], float], cooling, ambient: float, limit: float, *,
                      step: float = _GRID_STEP, grid_power=None) -> Equilibrium:
    """Operating temperature where the loss meets the heat removal, and its stability.

    Parameters
    ----------
    power : callable
        ``power(T)`` -> dissipation [W] at core temperature T [degC] (core plus winding).
    cooling : FixedResistance, SurfaceCooling or HandbookCooling
        Heat removal ``Q(T)`` [W] with ``removed(T, ambient)`` and ``slope(T, ambient)``.
    ambient : float
        Ambient temperature [degC], below ``limit``.
    limit : float
        Highest temperature that is a working point [degC].
    step : float
        Spacing of the grid on which the curves are first compared [K].
    grid_power : array_like, optional
        ``power`` already evaluated on ``np.linspace(ambient, limit, n)`` (any n >= 9) [W].

    Returns
    -------
    Equilibrium

    Notes
    -----
    Heating from ambient, :math:`C\\,dT/dt = P(T) - Q(T)` rises until the first
    temperature where :math:`Q(T) \\ge P(T)`; that crossing (refined by Brent's method)
    is the operating point. It is stable when the loop gain

    .. math:: G = \\frac{dP/dT}{dQ/dT} \\quad (= R_{th}\\, dP/dT \\text{ for } Q = (T - T_a)/R_{th})

    is below 1. With no crossing up to ``limit`` the temperature runs past the limit:
    thermal runaway. dP/dT is a central difference of ``power`` over 0.01 K.

    References
    ----------
    .. [1] E. C. Snelling, "Soft Ferrites: Properties and Applications", 2nd ed.,
       Butterworths, 1988 (thermal stability of ferrite cores whose loss rises with
       temperature; from memory).
    """
    ta = _finite(ambient, "ambient", "degC")
    tl = _finite(limit, "limit", "degC")
    if not ta < tl:
        raise ValueError(f"ambient {ta:g} degC must lie below the limit temperature {tl:g} degC")
    if grid_power is None:
        temps = _grid(ta, tl, _positive(step, "step", "K"))
        p = _evaluate(power, temps)
    else:
        p = np.asarray(grid_power, dtype=float)
        temps = np.linspace(ta, tl, p.size)
    q = np.asarray(cooling.removed(temps, ta), dtype=float)
    g = q - p

    def gap(t):
        return float(cooling.removed(t, ta)) - float(power(t))

    common = dict(ambient=ta, limit=tl, grid_temperature=temps, grid_power=p, grid_removed=q)
    if p[0] <= 0.0:
        t_star = ta
        i = 0
    else:
        above = np.nonzero(g >= 0.0)[0]
        if above.size == 0:
            return Equilibrium(None, None, None, False, True, None, **common)
        i = int(above[0])
        t_star = float(temps[i]) if g[i] == 0.0 else _brentq(gap, float(temps[i - 1]), float(temps[i]))
    h = 0.005
    lo, hi = max(t_star - h, ta), min(t_star + h, tl)
    dpdt = (float(power(hi)) - float(power(lo))) / (hi - lo)
    dqdt = float(cooling.slope(t_star, ta))
    gain = dpdt / dqdt if math.isfinite(dqdt) and dqdt > 0 else 0.0
    stable = gain < 1.0
    # next crossing back (Q falls below P again): the escape temperature
    escape = None
    below = np.nonzero(g[i + 1:] < 0.0)[0]
    if below.size:
        j = i + 1 + int(below[0])
        escape = _brentq(gap, float(temps[j - 1]), float(temps[j])) if g[j - 1] > 0 else float(temps[j - 1])
    return Equilibrium(t_star, float(power(t_star)), float(gain), bool(stable), not stable, escape, **common)


def max_ambient(temperatures, power, cooling, limit: float, *, lowest: float = _LOWEST_AMBIENT):
    """Highest ambient temperature with a stable operating point at or below the limit.

    Parameters
    ----------
    temperatures : array_like
        Increasing temperature grid ending at ``limit`` [degC].
    power : array_like
        Dissipation P(T) on that grid [W].
    cooling : FixedResistance, SurfaceCooling or HandbookCooling
        Heat removal.
    limit : float
        Limit temperature [degC].
    lowest : float
        Lowest ambient considered [degC] (at least the first grid temperature).

    Returns
    -------
    float or None
        The ambient [degC]; None when even ``lowest`` has no operating point.

    Notes
    -----
    Warming from ambient :math:`T_a` reaches an operating point at or below the limit
    exactly when :math:`\\max_{T_a \\le T \\le T_{lim}} [Q(T; T_a) - P(T)] \\ge 0`; the
    left side falls as :math:`T_a` rises, so the largest such :math:`T_a` is found by
    bisection. For a fixed resistance this is
    :math:`\\max_T [T - R_{th} P(T)]`, the ambient whose heat-removal line touches
    P(T) (or reaches it at the limit).

    References
    ----------
    .. [1] E. C. Snelling, "Soft Ferrites: Properties and Applications", 2nd ed.,
       Butterworths, 1988 (thermal runaway of ferrite cores; from memory).
    """
    t = np.asarray(temperatures, dtype=float)
    p = np.asarray(power, dtype=float)
    lo = max(float(lowest), float(t[0]))

    def margin(ta):
        sel = t >= ta
        ts = np.concatenate(([ta], t[sel]))
        ps = np.concatenate(([np.interp(ta, t, p)], p[sel]))
        return float(np.max(np.asarray(cooling.removed(ts, ta)) - ps))

    if margin(lo) < 0:
        return None
    if isinstance(cooling, FixedResistance):
        sel = t >= lo
        return float(min(np.max(t[sel] - cooling.r_th * p[sel]), limit))
    hi = float(limit)
    if margin(hi - 1e-9) >= 0:
        return hi
    for _ in range(60):
        mid = 0.5 * (lo + hi)
        if margin(mid) >= 0:
            lo = mid
        else:
            hi = mid
    return lo


# ---------------------------------------------------------------------------
# on the engine
# ---------------------------------------------------------------------------
@dataclass(frozen=True)
class ThermalResult:
    """Operating temperature of a core with its loss, stability and margins.

    Attributes
    ----------
    material : str
        Material name.
    temperature_c : float or None
        Operating (surface) temperature [degC]; None under thermal runaway.
    loss : workbench.engine.LossResult or None
        The engine's core loss at the operating temperature.
    loss_w_m3, loss_w : float or None
        Core loss density [W/m^3] and core loss [W] at the operating temperature.
    winding_loss_w : float
        Winding loss added to the core loss [W] (taken as constant).
    total_w : float or None
        Total dissipation at the operating temperature [W].
    loop_gain : float or None
        (dP/dT)/(dQ/dT) at the operating point [-].
    stable, runaway : bool
        Stable operating point found; no stable operating point below the limit.
    escape_temperature_c : float or None
        Temperature above which the core would run away [degC] (see :class:`Equilibrium`).
    limit_temperature_c : float
        Limit used [degC]; ``limit_source`` says where it came from.
    limit_source : str
        "Curie temperature ...", "limit temperature ..." or "given".
    ambient_c : float
        Ambient temperature [degC].
    max_ambient_c : float or None
        Highest ambient with a stable operating point at or below the limit [degC].
    max_b_peak_t : float or None
        Highest B_peak at this frequency and flux shape with a stable operating point at
        or below the limit, at this ambient [T] (capped at the saturation flux density).
    b_peak_t, frequency_hz : float
        The waveform's peak flux density [T] and frequency [Hz].
    h_dc_a_m : float or None
        DC bias field strength given to the engine [A/m].
    volume_m3 : float
        Core volume [m^3].
    cooling : object
        The heat removal used.
    curve : dict
        ``temperature_c``, ``power_w``, ``removed_w`` (at this ambient) and
        ``removed_at_max_ambient_w`` arrays from ambient to the limit, for plots.
    warnings : tuple of str
        Assumptions and findings (the engine's warnings at the operating point first).
    cautions : tuple of str
        Safety cautions (:data:`CAUTIONS`).
    """

    material: str
    temperature_c: float | None
    loss: object
    loss_w_m3: float | None
    loss_w: float | None
    winding_loss_w: float
    total_w: float | None
    loop_gain: float | None
    stable: bool
    runaway: bool
    escape_temperature_c: float | None
    limit_temperature_c: float
    limit_source: str
    ambient_c: float
    max_ambient_c: float | None
    max_b_peak_t: float | None
    b_peak_t: float
    frequency_hz: float
    h_dc_a_m: float | None
    volume_m3: float
    cooling: object
    curve: dict = field(repr=False)
    warnings: tuple = ()
    cautions: tuple = CAUTIONS

    def __repr__(self) -> str:
        state = (f"{self.temperature_c:.1f} degC, loop gain {self.loop_gain:.3g}" if self.temperature_c is not None
                 else "thermal runaway")
        return (f"ThermalResult({self.material}, ambient {self.ambient_c:g} degC: {state}; "
                f"limit {self.limit_temperature_c:g} degC, {len(self.warnings)} warning(s))")

    def to_dict(self) -> dict:
        """Plain dict with SI-suffixed keys, inputs, warnings and cautions, ready for JSON."""
        return to_jsonable({
            "material": self.material,
            "temperature_c": self.temperature_c,
            "loss_w_m3": self.loss_w_m3,
            "loss_w": self.loss_w,
            "winding_loss_w": self.winding_loss_w,
            "total_w": self.total_w,
            "loop_gain": self.loop_gain,
            "stable": self.stable,
            "runaway": self.runaway,
            "escape_temperature_c": self.escape_temperature_c,
            "limit_temperature_c": self.limit_temperature_c,
            "limit_source": self.limit_source,
            "ambient_c": self.ambient_c,
            "max_ambient_c": self.max_ambient_c,
            "max_b_peak_t": self.max_b_peak_t,
            "b_peak_t": self.b_peak_t,
            "frequency_hz": self.frequency_hz,
            "h_dc_a_m": self.h_dc_a_m,
            "volume_m3": self.volume_m3,
            "cooling": self.cooling.to_dict(),
            "loss": None if self.loss is None else self.loss.to_dict(),
            "warnings": list(self.warnings),
            "cautions": list(self.cautions),
        })


def _limit_of(material, limit_temperature):
    given = limit_temperature
    own = getattr(material, "limit_temperature", None)
    name = getattr(material, "name", "the material")
    if given is not None:
        t = _finite(given, "limit_temperature", "degC")
        if own is not None and t > own:
            raise ValueError(f"limit_temperature {t:g} degC lies above the limit of {name} ({own:g} degC, "
                             f"{'its Curie temperature' if 'ferrite' in getattr(material, 'family', '') else 'its limit temperature'})")
        return t, "given"
    if own is None:
        raise ValueError(f"{name} has no limit temperature: give limit_temperature [degC] (the Curie temperature "
                         "of a ferrite, or the thermal class of the insulation system, e.g. 155)")
    label = "Curie temperature" if "ferrite" in getattr(material, "family", "") else "limit temperature"
    return float(own), f"{label} of {name}"


def thermal_operating_point(waveform, material, *, volume, ambient, cooling, winding_loss=0.0, h_dc=None,
                            limit_temperature=None, margins=True, thickness=None, resistivity=None,
                            skin_effect=True, minor_loops=True, threshold=None) -> ThermalResult:
    """Operating temperature of a core from its loss and its heat removal.

    Parameters
    ----------
    waveform : FluxWaveform or ShapeSpec
        One period of flux at the working point.
    material : Material or str
        Library material or its name (it needs a limit temperature, or give one).
    volume : float
        Core volume [m^3].
    ambient : float
        Ambient (still-air) temperature [degC].
    cooling : FixedResistance, SurfaceCooling or HandbookCooling
        Heat removal (see :func:`make_cooling`).
    winding_loss : float
        Winding loss added to the core loss, constant [W].
    h_dc : float, optional
        DC bias field strength [A/m], passed to the engine.
    limit_temperature : float, optional
        Limit temperature [degC], at most the material's own (default the material's).
    margins : bool
        Also compute the highest ambient and the highest B_peak.
    thickness, resistivity : float, optional
        Overrides passed to the engine [m], [ohm m].
    skin_effect, minor_loops : bool
        Engine options.
    threshold : float, optional
        Smallest flux reversal counted as a loop [T] (engine option).

    Returns
    -------
    ThermalResult

    Raises
    ------
    ValueError
        Bad input (named), an ambient at or above the limit, or a material without limit
        temperature and none given.

    Notes
    -----
    :math:`P(T) = V\\,p_{engine}(T) + P_{winding}`; the operating point, stability and
    the ambient margin as in :func:`solve_equilibrium` and :func:`max_ambient`. The
    B_peak margin scales the flux of the same shape (the engine's laws in flux scale)
    and finds by bisection the largest scale whose curve still meets the heat removal at
    or below the limit.

    References
    ----------
    .. [1] E. C. Snelling, "Soft Ferrites: Properties and Applications", 2nd ed.,
       Butterworths, 1988 (from memory).
    """
    from workbench import engine
    from workbench.shapes import ShapeSpec
    from workbench.waveforms import FluxWaveform

    mat = engine.resolve_material(material)
    name = getattr(mat, "name", str(mat))
    vol = _positive(volume, "volume", "m^3")
    ta = _finite(ambient, "ambient", "degC")
    pw = _finite(winding_loss, "winding_loss", "W")
    if pw < 0:
        raise ValueError(f"winding_loss must be >= 0 [W]; got {winding_loss!r}")
    if not isinstance(cooling, (FixedResistance, SurfaceCooling, HandbookCooling)):
        raise ValueError(f"cooling must come from make_cooling(); got {type(cooling).__name__}")
    limit, limit_source = _limit_of(mat, limit_temperature)
    if not ta < limit:
        raise ValueError(f"ambient {ta:g} degC is not below the limit temperature {limit:g} degC ({limit_source})")
    opts = dict(thickness=thickness, resistivity=resistivity, skin_effect=skin_effect,
                minor_loops=minor_loops, threshold=threshold, h_dc=h_dc)
    w = waveform.waveform() if isinstance(waveform, ShapeSpec) else waveform
    if not isinstance(w, FluxWaveform):
        raise ValueError(f"waveform must be a FluxWaveform or a ShapeSpec; got {type(waveform).__name__}")
    freq = float(w.freq)

    laws_cache: dict[float, object] = {}

    def laws_at(t):
        key = float(t)
        if key not in laws_cache:
            laws_cache[key] = engine.loss_laws(waveform, mat, engine.Conditions(temperature=key, **opts))
        return laws_cache[key]

    def core_density(t, scale=1.0):
        return float(laws_at(t).parts(freq, scale)["total"])

    def power(t):
        return vol * core_density(t) + pw

    upper = _grid(ta, limit)
    lower = _grid(_LOWEST_AMBIENT, ta)[:-1] if (margins and _LOWEST_AMBIENT < ta) else np.zeros(0)
    temps = np.concatenate((lower, upper))
    sel = np.arange(temps.size) >= lower.size
    p_grid = _evaluate(power, temps)
    eq = solve_equilibrium(power, cooling, ta, limit, grid_power=p_grid[sel])

    warnings: list[str] = []
    loss = None
    if eq.temperature is not None:
        loss = engine.core_loss(waveform, mat, temperature=eq.temperature, **opts)
        warnings += list(loss.warnings)
    else:
        at_limit = engine.core_loss(waveform, mat, temperature=limit, **opts)
        warnings += list(at_limit.warnings)
        warnings.append(
            f"thermal runaway: the dissipation stays above what the surface can remove all the way to {limit:g} degC "
            f"({limit_source}); at {limit:g} degC the core loses {at_limit.loss_w(vol):.3g} W"
            + (f" plus {pw:.3g} W winding loss" if pw else "")
            + f", the surface removes {float(cooling.removed(limit, ta)):.3g} W. There is no working point")
    if eq.temperature is not None and not eq.stable:
        warnings.append(f"the operating point at {eq.temperature:.1f} degC is marginal (loop gain "
                        f"{eq.loop_gain:.3g} >= 1): treated as thermal runaway")
    if eq.escape_temperature is not None and eq.stable:
        warnings.append(f"the core runs away if it is ever heated above {eq.escape_temperature:.1f} degC "
                        "(where the loss overtakes the heat removal again)")

    max_amb = max_b = None
    q_max = None
    if margins:
        max_amb = max_ambient(temps, p_grid, cooling, limit)
        if max_amb is not None:
            q_max = np.asarray(cooling.removed(temps, max_amb), dtype=float)
        max_b, b_note = _max_b_peak(temps[sel], laws_at, freq, vol, pw, cooling, ta, limit, float(w.b_peak), mat)
        if b_note:
            warnings.append(b_note)
        if h_dc:
            warnings.append("max_b_peak_t counts the AC flux only: with DC bias the DC flux adds to it, and the peak "
                            "must stay below the saturation flux density at temperature (not checked here)")
    coeffs = getattr(getattr(mat, "steinmetz", None), "temperature", None)
    valid = getattr(coeffs, "valid_range", None)
    if valid is not None and limit > valid[1] and (margins or eq.temperature is None or eq.escape_temperature is not None):
        warnings.append(f"{name}'s loss data cover {valid[0]:g}-{valid[1]:g} degC: the loss above {valid[1]:g} degC, "
                        "on which the runaway limit and the margins rest, is extrapolated; treat them as indications")
    if pw:
        warnings.append(f"winding loss {pw:.3g} W taken as constant; copper resistance rises about 0.39 %/K "
                        "(IEC 60028 annealed copper, from memory): give the winding loss at the expected temperature")
    warnings.append(f"heat removal: {cooling.describe()}; the core is taken as one temperature")
    if isinstance(cooling, SurfaceCooling) and eq.temperature is not None:
        other = heat.handbook_temperature_rise(eq.power, cooling.area)
        warnings.append(f"for comparison, the empirical handbook relation gives a rise of {other:.3g} K at "
                        f"{eq.power:.3g} W over this area (this estimate: {eq.temperature - ta:.3g} K)")

    curve = {"temperature_c": temps[sel], "power_w": p_grid[sel],
             "removed_w": np.asarray(cooling.removed(temps[sel], ta), dtype=float),
             "removed_at_max_ambient_w": None if q_max is None else q_max[sel]}
    loss_w = None if loss is None else loss.loss_w(vol)
    return ThermalResult(
        material=name, temperature_c=eq.temperature, loss=loss,
        loss_w_m3=None if loss is None else loss.loss_w_m3, loss_w=loss_w, winding_loss_w=pw,
        total_w=None if loss_w is None else loss_w + pw, loop_gain=eq.loop_gain, stable=eq.stable,
        runaway=eq.runaway, escape_temperature_c=eq.escape_temperature if eq.stable else None,
        limit_temperature_c=limit, limit_source=limit_source, ambient_c=ta, max_ambient_c=max_amb,
        max_b_peak_t=max_b, b_peak_t=float(w.b_peak), frequency_hz=freq,
        h_dc_a_m=None if h_dc is None else float(h_dc), volume_m3=vol, cooling=cooling, curve=curve,
        warnings=tuple(dict.fromkeys(warnings)), cautions=CAUTIONS)


def _max_b_peak(temps, laws_at, freq, vol, pw, cooling, ta, limit, b_peak, material):
    """Largest flux scale with an operating point at or below the limit, as B_peak [T]."""
    q = np.asarray(cooling.removed(temps, ta), dtype=float)[:, None]
    laws = [laws_at(t) for t in temps]

    def ok(scales):
        # every part rises with the flux scale, so "a crossing exists" holds below one scale
        p = np.stack([np.asarray(law.parts(freq, scales)["total"], dtype=float) for law in laws]) * vol + pw
        return np.any(q - p >= 0.0, axis=0)

    b_sat = getattr(material, "b_sat", None)
    hi = (b_sat / b_peak) if b_sat else 1e3
    lo = 1e-6
    ends = ok(np.array([lo, hi]))
    if ends[1]:
        if b_sat:
            return float(b_sat), (f"a working point exists up to the saturation flux density {b_sat:g} T at this "
                                  "frequency: max_b_peak_t is capped there")
        return float(hi * b_peak), "a working point exists up to 1000 times the given flux: max_b_peak_t is capped there"
    if not ends[0]:
        return None, ("no B_peak has a working point at this ambient: the winding loss alone overheats the part"
                      if pw else None)
    llo, lhi = math.log(lo), math.log(hi)
    for _ in range(4):  # 63 points per round: the bracket (ln 1e9 wide) ends below 1e-6 relative
        trial = np.linspace(llo, lhi, 65)[1:-1]
        good = ok(np.exp(trial))
        k = int(np.count_nonzero(good))  # monotone: the first k are True
        llo, lhi = (trial[k - 1] if k else llo), (trial[k] if k < trial.size else lhi)
    return float(math.exp(llo) * b_peak), None
