"""Heat removal from the surface of a magnetic component: natural convection, radiation,
the empirical handbook temperature-rise relation and thermal resistance.

Pure functions, SI units (temperatures in degC at the interface, converted to kelvin
inside where the physics needs absolute temperature). Air at sea-level pressure
(101 325 Pa) throughout; a component in an enclosure, on a heat sink or in forced air
is outside what these relations describe.
"""
from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from scipy import constants

__all__ = [
    "DEFAULT_EMISSIVITY",
    "AirProperties",
    "air_properties",
    "characteristic_height",
    "convection_coefficient",
    "handbook_heat_loss",
    "handbook_temperature_rise",
    "nusselt_vertical_churchill_chu",
    "radiation_coefficient",
    "rayleigh_number",
    "surface_heat_loss",
    "surface_heat_loss_slope",
    "thermal_resistance",
]

ZERO_CELSIUS = constants.zero_Celsius            # 273.15 K
STEFAN_BOLTZMANN = constants.Stefan_Boltzmann    # W/(m^2 K^4)
GRAVITY = constants.g                            # standard gravity, m/s^2
PRESSURE = constants.atm                         # Pa
_R_AIR = constants.R / 0.0289644                 # J/(kg K): molar gas constant / molar mass of dry air
_CP_AIR = 1006.0                                 # J/(kg K); from memory: within 1 % of tabulated values 250-400 K

#: Emissivity used when none is given: varnished, painted or ferrite surfaces are
#: 0.85-0.95 (from memory, common practice); bare bright metal is far lower (0.05-0.3).
DEFAULT_EMISSIVITY = 0.9

_HANDBOOK_EXPONENT = 0.833


@dataclass(frozen=True)
class AirProperties:
    """Properties of dry air at sea-level pressure.

    Parameters
    ----------
    temperature : float or ndarray
        Temperature [degC].
    density : float or ndarray
        Density [kg/m^3].
    viscosity : float or ndarray
        Dynamic viscosity [Pa s].
    conductivity : float or ndarray
        Thermal conductivity [W/(m K)].
    heat_capacity : float or ndarray
        Specific heat at constant pressure [J/(kg K)].
    """

    temperature: object
    density: object
    viscosity: object
    conductivity: object
    heat_capacity: object

    @property
    def kinematic_viscosity(self):
        """Kinematic viscosity [m^2/s]."""
        return self.viscosity / self.density

    @property
    def diffusivity(self):
        """Thermal diffusivity [m^2/s]."""
        return self.conductivity / (self.density * self.heat_capacity)

    @property
    def prandtl(self):
        """Prandtl number [-]."""
        return self.viscosity * self.heat_capacity / self.conductivity


def _array(value, name, *, positive=False, low=None):
    arr = np.asarray(value, dtype=float)
    if not np.all(np.isfinite(arr)):
        raise ValueError(f"{name} must be finite; got {value!r}")
    if positive and np.any(arr <= 0):
        raise ValueError(f"{name} must be positive; got {value!r}")
    if low is not None and np.any(arr < low):
        raise ValueError(f"{name} must be >= {low:g}; got {value!r}")
    return arr


def _out(arr):
    arr = np.asarray(arr, dtype=float)
    return float(arr) if arr.ndim == 0 else arr


def _kelvin(temperature_c, name):
    t = _array(temperature_c, name) + ZERO_CELSIUS
    if np.any(t <= 150.0) or np.any(t > 1500.0):
        raise ValueError(f"{name} must lie between -123 and 1227 degC (air properties); "
                         f"got {temperature_c!r}")
    return t


def air_properties(temperature):
    """Density, viscosity and conductivity of dry air at sea-level pressure.

    Parameters
    ----------
    temperature : float or array_like
        Air (film) temperature [degC], -123 to 1227 degC.

    Returns
    -------
    AirProperties
        Arrays shaped like ``temperature`` (floats for scalar input).

    Notes
    -----
    Ideal gas :math:`\\rho = p / (R_a T)` with :math:`p` = 101 325 Pa and
    :math:`R_a = R / M_{air}`, :math:`M_{air}` = 28.9644 g/mol. Sutherland's law for
    the viscosity and the standard-atmosphere expression for the conductivity (T in K):

    .. math::

        \\mu = \\frac{1.458\\times10^{-6}\\, T^{3/2}}{T + 110.4}, \\qquad
        k = \\frac{2.648151\\times10^{-3}\\, T^{3/2}}{T + 245.4\\cdot 10^{-12/T}}

    and :math:`c_p` = 1006 J/(kg K) (from memory; within 1 % of tabulated values from
    250 to 400 K).

    References
    ----------
    .. [1] NOAA, NASA, USAF, "U.S. Standard Atmosphere, 1976", U.S. Government Printing
       Office, 1976, eqs. (51) and (53) (viscosity and thermal conductivity), from memory.
    """
    t = _kelvin(temperature, "temperature")
    density = PRESSURE / (_R_AIR * t)
    viscosity = 1.458e-6 * t**1.5 / (t + 110.4)
    conductivity = 2.648151e-3 * t**1.5 / (t + 245.4 * 10.0 ** (-12.0 / t))
    cp = np.full_like(t, _CP_AIR)
    return AirProperties(_out(t - ZERO_CELSIUS), _out(density), _out(viscosity),
                         _out(conductivity), _out(cp))


def rayleigh_number(t_surface, t_ambient, height):
    """Rayleigh number of natural convection along a heated surface in air.

    Parameters
    ----------
    t_surface : float or array_like
        Surface temperature [degC].
    t_ambient : float or array_like
        Temperature of the still air far from the surface [degC].
    height : float or array_like
        Characteristic length (height of a vertical surface) [m].

    Returns
    -------
    float or ndarray
        Rayleigh number [-] with the air properties at the film temperature.

    Notes
    -----
    .. math:: Ra_L = \\frac{g\\, \\beta\\, |T_s - T_a|\\, L^3}{\\nu\\, a}, \\qquad
              \\beta = 1 / T_f, \\quad T_f = (T_s + T_a)/2

    (ideal gas: the expansion coefficient is the reciprocal of the absolute film
    temperature).

    References
    ----------
    .. [1] F. P. Incropera, D. P. DeWitt, T. L. Bergman, A. S. Lavine, "Fundamentals of
       Heat and Mass Transfer", 6th ed., Wiley, 2007, sec. 9.4 (from memory).
    """
    ts = _kelvin(t_surface, "t_surface")
    ta = _kelvin(t_ambient, "t_ambient")
    length = _array(height, "height", positive=True)
    film = 0.5 * (ts + ta)
    air = air_properties(film - ZERO_CELSIUS)
    nu = np.asarray(air.kinematic_viscosity)
    a = np.asarray(air.diffusivity)
    return _out(GRAVITY * np.abs(ts - ta) * length**3 / (film * nu * a))


def nusselt_vertical_churchill_chu(rayleigh, prandtl):
    """Mean Nusselt number of natural convection on an isothermal vertical surface.

    Parameters
    ----------
    rayleigh : float or array_like
        Rayleigh number based on the height, 0 to 1e12 [-].
    prandtl : float or array_like
        Prandtl number of the fluid [-].

    Returns
    -------
    float or ndarray
        Mean Nusselt number :math:`\\bar h L / k` [-].

    Notes
    -----
    Laminar range (:math:`Ra_L \\le 10^9`), the more accurate of the two published forms:

    .. math:: \\overline{Nu}_L = 0.68 + \\frac{0.670\\, Ra_L^{1/4}}
              {[1 + (0.492/Pr)^{9/16}]^{4/9}}

    above it the form valid over the whole range:

    .. math:: \\overline{Nu}_L = \\left\\{0.825 + \\frac{0.387\\, Ra_L^{1/6}}
              {[1 + (0.492/Pr)^{9/16}]^{8/27}}\\right\\}^2

    References
    ----------
    .. [1] S. W. Churchill, H. H. S. Chu, "Correlating equations for laminar and turbulent
       free convection from a vertical plate", Int. J. Heat Mass Transfer 18(11),
       pp. 1323-1329, 1975.
    """
    ra = _array(rayleigh, "rayleigh", low=0.0)
    pr = _array(prandtl, "prandtl", positive=True)
    if np.any(ra > 1e12):
        raise ValueError(f"rayleigh must be <= 1e12 (range of the correlation); got {rayleigh!r}")
    psi = 1.0 + (0.492 / pr) ** (9.0 / 16.0)
    laminar = 0.68 + 0.670 * ra**0.25 / psi ** (4.0 / 9.0)
    general = (0.825 + 0.387 * ra ** (1.0 / 6.0) / psi ** (8.0 / 27.0)) ** 2
    return _out(np.where(ra <= 1e9, laminar, general))


def convection_coefficient(t_surface, t_ambient, height, *, method="churchill-chu"):
    """Natural-convection heat-transfer coefficient of a vertical surface in still air.

    Parameters
    ----------
    t_surface : float or array_like
        Surface temperature [degC].
    t_ambient : float or array_like
        Still-air temperature [degC].
    height : float or array_like
        Height of the surface [m].
    method : {"churchill-chu", "simplified"}
        Correlation [-]: ``"churchill-chu"``: :func:`nusselt_vertical_churchill_chu` with the air
        properties of :func:`air_properties` at the film temperature;
        ``"simplified"``: the laminar relation for air :math:`h = 1.42 (\\Delta T/L)^{1/4}`.

    Returns
    -------
    float or ndarray
        Heat-transfer coefficient [W/(m^2 K)]; 0 where the surface is at ambient.

    Notes
    -----
    .. math:: h = \\overline{Nu}_L\\, k_{air} / L \\quad\\text{or}\\quad
              h = 1.42\\, (\\Delta T / L)^{1/4}

    The simplified relation holds for laminar flow (:math:`10^4 < Ra_L < 10^9`) in air
    near room temperature and atmospheric pressure.

    References
    ----------
    .. [1] J. P. Holman, "Heat Transfer", 10th ed., McGraw-Hill, 2010, table 7-2
       (simplified free-convection relations for air; from memory).
    .. [2] S. W. Churchill, H. H. S. Chu, Int. J. Heat Mass Transfer 18(11), 1975.
    """
    ts = _array(t_surface, "t_surface")
    ta = _array(t_ambient, "t_ambient")
    length = _array(height, "height", positive=True)
    dt = np.abs(ts - ta)
    if method == "simplified":
        return _out(1.42 * (dt / length) ** 0.25)
    if method != "churchill-chu":
        raise ValueError(f"method must be 'churchill-chu' or 'simplified'; got {method!r}")
    film = 0.5 * (ts + ta)
    air = air_properties(film)
    ra = rayleigh_number(ts, ta, length)
    nu = nusselt_vertical_churchill_chu(ra, air.prandtl)
    h = np.asarray(nu) * np.asarray(air.conductivity) / length
    return _out(np.where(dt > 0, h, 0.0))


def radiation_coefficient(t_surface, t_ambient, emissivity=DEFAULT_EMISSIVITY):
    """Linearised radiation heat-transfer coefficient to large surroundings.

    Parameters
    ----------
    t_surface : float or array_like
        Surface temperature [degC].
    t_ambient : float or array_like
        Temperature of the surroundings (taken equal to the air) [degC].
    emissivity : float
        Total hemispherical emissivity of the surface, 0 to 1 [-].

    Returns
    -------
    float or ndarray
        Coefficient :math:`h_r` [W/(m^2 K)] such that the radiated flux is
        :math:`h_r (T_s - T_a)`.

    Notes
    -----
    Grey surface in large isothermal surroundings, absolute temperatures:

    .. math:: q = \\varepsilon \\sigma (T_s^4 - T_a^4)
              = h_r (T_s - T_a), \\quad
              h_r = \\varepsilon \\sigma (T_s^2 + T_a^2)(T_s + T_a)

    with :math:`\\sigma` from ``scipy.constants.Stefan_Boltzmann``.

    References
    ----------
    .. [1] F. P. Incropera, D. P. DeWitt, T. L. Bergman, A. S. Lavine, "Fundamentals of
       Heat and Mass Transfer", 6th ed., Wiley, 2007, eqs. (1.7)-(1.9) (from memory).
    """
    ts = _kelvin(t_surface, "t_surface")
    ta = _kelvin(t_ambient, "t_ambient")
    eps = _array(emissivity, "emissivity", low=0.0)
    if np.any(eps > 1.0):
        raise ValueError(f"emissivity must lie in [0, 1]; got {emissivity!r}")
    return _out(eps * STEFAN_BOLTZMANN * (ts * ts + ta * ta) * (ts + ta))


def surface_heat_loss(t_surface, t_ambient, area, height, emissivity=DEFAULT_EMISSIVITY):
    """Heat leaving a component's surface by natural convection and radiation.

    Parameters
    ----------
    t_surface : float or array_like
        Surface temperature [degC].
    t_ambient : float or array_like
        Still-air and surroundings temperature [degC].
    area : float
        Surface area exposed to the air [m^2].
    height : float
        Characteristic height for the convection correlation [m].
    emissivity : float
        Surface emissivity [-].

    Returns
    -------
    float or ndarray
        Heat flow [W]; negative where the surface is colder than ambient.

    Notes
    -----
    The whole surface is treated as vertical (Churchill-Chu) at one temperature:

    .. math:: Q = A\\, [h_c(T_s, T_a, L) + h_r(T_s, T_a)]\\, (T_s - T_a)

    References
    ----------
    .. [1] S. W. Churchill, H. H. S. Chu, Int. J. Heat Mass Transfer 18(11), 1975.
    .. [2] F. P. Incropera et al., "Fundamentals of Heat and Mass Transfer", 6th ed.,
       Wiley, 2007, ch. 1 and 9 (from memory).
    """
    a = _array(area, "area", positive=True)
    ts = _array(t_surface, "t_surface")
    ta = _array(t_ambient, "t_ambient")
    h = (np.asarray(convection_coefficient(ts, ta, height))
         + np.asarray(radiation_coefficient(ts, ta, emissivity)))
    return _out(a * h * (ts - ta))


def surface_heat_loss_slope(t_surface, t_ambient, area, height, emissivity=DEFAULT_EMISSIVITY):
    """Derivative of :func:`surface_heat_loss` with respect to the surface temperature.

    Parameters
    ----------
    t_surface : float or array_like
        Surface temperature [degC].
    t_ambient : float or array_like
        Still-air and surroundings temperature [degC].
    area : float
        Surface area [m^2].
    height : float
        Characteristic height [m].
    emissivity : float
        Surface emissivity [-].

    Returns
    -------
    float or ndarray
        :math:`dQ/dT_s` [W/K], the reciprocal of the incremental thermal resistance.

    Notes
    -----
    Central difference with a 0.01 K step of the smooth function
    :func:`surface_heat_loss` (the convection term goes as :math:`\\Delta T^{5/4}`, so
    the slope is finite at ambient).

    References
    ----------
    .. [1] S. W. Churchill, H. H. S. Chu, Int. J. Heat Mass Transfer 18(11), 1975.
    """
    ts = _array(t_surface, "t_surface")
    step = 0.01
    up = np.asarray(surface_heat_loss(ts + step, t_ambient, area, height, emissivity))
    down = np.asarray(surface_heat_loss(ts - step, t_ambient, area, height, emissivity))
    return _out((up - down) / (2 * step))


def handbook_temperature_rise(power, area):
    """Temperature rise of a wound magnetic component from the empirical handbook relation.

    Parameters
    ----------
    power : float or array_like
        Total dissipation, core plus winding [W].
    area : float or array_like
        Outer surface area of the component [m^2].

    Returns
    -------
    float or ndarray
        Surface temperature rise over still ambient air [K].

    Notes
    -----
    With the dissipation in mW and the area in cm^2:

    .. math:: \\Delta T = \\left(\\frac{P\\,[\\mathrm{mW}]}{A\\,[\\mathrm{cm^2}]}\\right)^{0.833}

    an empirical fit for natural convection and radiation of wound components in still
    air, widely quoted in magnetics design handbooks and application notes (from memory;
    no document at hand). 100 mW/cm^2 gives about 46 K.

    References
    ----------
    .. [1] Widely used empirical relation of magnetics design practice, from memory;
       comparable power-law fits appear in C. W. T. McLyman, "Transformer and Inductor
       Design Handbook", 3rd ed., Marcel Dekker, 2004, ch. 6 (temperature rise).
    """
    p = _array(power, "power", low=0.0)
    a = _array(area, "area", positive=True)
    return _out((p * 1e3 / (a * 1e4)) ** _HANDBOOK_EXPONENT)


def handbook_heat_loss(temperature_rise, area):
    """Dissipation that the empirical handbook relation gives for a temperature rise.

    Parameters
    ----------
    temperature_rise : float or array_like
        Surface temperature rise over ambient [K]; negative values give negative heat.
    area : float or array_like
        Outer surface area of the component [m^2].

    Returns
    -------
    float or ndarray
        Heat flow [W], the inverse of :func:`handbook_temperature_rise`.

    Notes
    -----
    .. math:: P\\,[\\mathrm{mW}] = A\\,[\\mathrm{cm^2}]\\, \\Delta T^{1/0.833}

    References
    ----------
    .. [1] Widely used empirical relation of magnetics design practice, from memory
       (see :func:`handbook_temperature_rise`); comparable fits in C. W. T. McLyman,
       "Transformer and Inductor Design Handbook", 3rd ed., Marcel Dekker, 2004, ch. 6.
    """
    dt = _array(temperature_rise, "temperature_rise")
    a = _array(area, "area", positive=True)
    return _out(np.sign(dt) * a * 1e4 * np.abs(dt) ** (1.0 / _HANDBOOK_EXPONENT) * 1e-3)


def thermal_resistance(area, temperature_rise, *, t_ambient=25.0, height=None,
                       emissivity=DEFAULT_EMISSIVITY):
    """Surface-to-ambient thermal resistance of a component from its surface area.

    Parameters
    ----------
    area : float
        Surface area exposed to the air [m^2].
    temperature_rise : float or array_like
        Surface temperature rise at which the resistance is taken [K] (> 0).
    t_ambient : float
        Ambient temperature [degC].
    height : float, optional
        Characteristic height [m]; default :func:`characteristic_height` of ``area``.
    emissivity : float
        Surface emissivity [-].

    Returns
    -------
    float or ndarray
        Secant thermal resistance :math:`\\Delta T / Q` [K/W].

    Notes
    -----
    Convection and radiation make the resistance fall as the component warms, so it is
    quoted at a temperature rise:

    .. math:: R_{th} = \\frac{\\Delta T}{A\\,[h_c + h_r]\\,\\Delta T}
              = \\frac{1}{A\\,(h_c + h_r)}

    References
    ----------
    .. [1] S. W. Churchill, H. H. S. Chu, Int. J. Heat Mass Transfer 18(11), 1975.
    .. [2] F. P. Incropera et al., "Fundamentals of Heat and Mass Transfer", 6th ed.,
       Wiley, 2007, sec. 3.1 (thermal resistance; from memory).
    """
    a = float(_array(area, "area", positive=True))
    dt = _array(temperature_rise, "temperature_rise", positive=True)
    ta = float(_array(t_ambient, "t_ambient"))
    length = characteristic_height(a) if height is None else height
    h = (np.asarray(convection_coefficient(ta + dt, ta, length))
         + np.asarray(radiation_coefficient(ta + dt, ta, emissivity)))
    return _out(1.0 / (a * h))


def characteristic_height(area):
    """Convection height of a compact component known only by its surface area.

    Parameters
    ----------
    area : float or array_like
        Outer surface area [m^2].

    Returns
    -------
    float or ndarray
        Edge length of the cube with that surface area, :math:`\\sqrt{A/6}` [m].

    Notes
    -----
    .. math:: L = \\sqrt{A / 6}

    A choice of ours for a component of roughly equal height, width and depth (common
    practice, no source); give the real height where it is known.

    References
    ----------
    .. [1] Common practice, no source: the cube as the stand-in for a compact wound
       component in hand estimates; for other characteristic lengths of bodies in free
       convection see F. P. Incropera et al., "Fundamentals of Heat and Mass Transfer",
       6th ed., Wiley, 2007, sec. 9.6 (from memory).
    """
    a = _array(area, "area", positive=True)
    return _out(np.sqrt(a / 6.0))
