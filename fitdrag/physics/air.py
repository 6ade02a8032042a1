"""Air and gravity: moist-air density, dynamic viscosity and local gravity.

Pure functions of the measured laboratory conditions, plus a small frozen :class:`Air`
record that carries density and viscosity (and, when known, the conditions they came from)
into the model.

Units are SI throughout except the conventional inputs named in each docstring:
temperature in degrees Celsius, relative humidity in percent, latitude in degrees.

References
----------
1. A. Picard, R. S. Davis, M. Gläser, K. Fujii, "Revised formula for the density of moist
   air (CIPM-2007)", Metrologia 45 (2008) 149-155, doi:10.1088/0026-1394/45/2/004;
   eq. (1) and Appendix A1 (formulas for p_sv, f and Z, and all constants).
2. W. Sutherland, "The viscosity of gases and molecular force", Phil. Mag. 36 (1893) 507-531;
   constants as used in U.S. Standard Atmosphere 1976 (NOAA/NASA/USAF, 1976).
3. National Imagery and Mapping Agency, "Department of Defense World Geodetic System 1984",
   NIMA TR8350.2, 3rd ed., amendment 1 (2000): Table 3.4 (defining and derived constants),
   eq. (4-1) (Somigliana closed form) and eq. (4-3) (normal gravity above the ellipsoid).
4. CGPM, 3rd meeting (1901), declaration on the unit of mass and definition of weight:
   standard acceleration of gravity 980.665 cm/s^2.
"""

from __future__ import annotations

import math
import warnings
from dataclasses import asdict, dataclass
from typing import Any

import numpy as np

from fitdrag.errors import InputError

__all__ = [
    "CIPM_PRESSURE_RANGE",
    "CIPM_TEMPERATURE_RANGE",
    "STANDARD_GRAVITY",
    "Air",
    "CIPMRangeWarning",
    "air_viscosity",
    "dry_air_density",
    "local_gravity",
    "moist_air_density",
]

#: Standard acceleration of gravity, exact by definition (ref. 4). [m/s^2]
STANDARD_GRAVITY = 9.80665

_ZERO_CELSIUS = 273.15  # [K]

# --- CIPM-2007 constants, Picard et al. 2008, Appendix A1 (ref. 1) ------------------------
_R = 8.314472  # molar gas constant as adopted in CIPM-2007 [J/(mol K)]
_M_V = 18.01528e-3  # molar mass of water [kg/mol]
# saturation vapour pressure over water, p_sv = exp(A T^2 + B T + C + D/T) [Pa], T in K
_A = 1.2378847e-5  # [K^-2]
_B = -1.9121316e-2  # [K^-1]
_C = 33.93711047
_D = -6.3431645e3  # [K]
# enhancement factor f = alpha + beta p + gamma t^2, t in °C, p in Pa
_ALPHA = 1.00062
_BETA = 3.14e-8  # [Pa^-1]
_GAMMA = 5.6e-7  # [K^-2]
# compressibility factor Z (t in °C, T in K, p in Pa)
_A0 = 1.58123e-6  # [K Pa^-1]
_A1 = -2.9331e-8  # [Pa^-1]
_A2 = 1.1043e-10  # [K^-1 Pa^-1]
_B0 = 5.707e-6  # [K Pa^-1]
_B1 = -2.051e-8  # [Pa^-1]
_C0 = 1.9898e-4  # [K Pa^-1]
_C1 = -2.376e-6  # [Pa^-1]
_D_Z = 1.83e-11  # [K^2 Pa^-2]
_E_Z = -0.765e-8  # [K^2 Pa^-2]

#: Range of conditions over which Picard et al. (2008) state the full CIPM-2007 formula.
CIPM_TEMPERATURE_RANGE = (15.0, 27.0)  # [°C]
CIPM_PRESSURE_RANGE = (60e3, 110e3)  # [Pa]

# --- Sutherland's law (ref. 2) -------------------------------------------------------------
_MU_REF = 1.716e-5  # [Pa s] at _T_REF
_T_REF = 273.15  # [K]
_S = 110.4  # Sutherland temperature [K]

# --- WGS84, NIMA TR8350.2 3rd ed. (2000), Table 3.4 (ref. 3) --------------------------------
_WGS84_A = 6378137.0  # semi-major axis [m]
_WGS84_F = 1.0 / 298.257223563  # flattening
_WGS84_GAMMA_E = 9.7803253359  # normal gravity at the equator [m/s^2]
_WGS84_GAMMA_P = 9.8321849378  # normal gravity at the poles [m/s^2]
_WGS84_K = 0.00193185265241  # Somigliana constant k = b gamma_p / (a gamma_e) - 1
_WGS84_E2 = 6.69437999014e-3  # first eccentricity squared
_WGS84_M = 0.00344978650684  # m = omega^2 a^2 b / GM


class CIPMRangeWarning(UserWarning):
    """The CIPM-2007 density formula is evaluated outside the range its authors state."""


def _first_bad(values: np.ndarray, bad: np.ndarray) -> float:
    values, bad = np.broadcast_arrays(values, bad)
    return float(values.flat[np.flatnonzero(bad)[0]])


def _check_finite(name: str, values: np.ndarray, unit: str, fix: str) -> None:
    bad = ~np.isfinite(values)
    if np.any(bad):
        raise InputError(
            f"{name}: must be a finite number, got {_first_bad(values, bad)}{unit}; {fix}"
        )


def _check_temperature(temperature: Any) -> np.ndarray:
    t = np.asarray(temperature, dtype=float)
    fix = "give the air temperature in degrees Celsius."
    _check_finite("temperature", t, " °C", fix)
    bad = t <= -_ZERO_CELSIUS
    if np.any(bad):
        raise InputError(
            f"temperature: must be above absolute zero (-273.15 °C), got "
            f"{_first_bad(t, bad)} °C; {fix}"
        )
    return t


def _check_pressure(pressure: Any) -> np.ndarray:
    p = np.asarray(pressure, dtype=float)
    fix = "give the absolute air pressure in pascals (101325 at standard sea level)."
    _check_finite("pressure", p, " Pa", fix)
    bad = p <= 0.0
    if np.any(bad):
        raise InputError(f"pressure: must be positive, got {_first_bad(p, bad)} Pa; {fix}")
    return p


def _check_relative_humidity(relative_humidity: Any) -> np.ndarray:
    rh = np.asarray(relative_humidity, dtype=float)
    fix = "give relative humidity in percent (50 for 50 %), from 0 to 100."
    _check_finite("relative_humidity", rh, " %", fix)
    bad = (rh < 0.0) | (rh > 100.0)
    if np.any(bad):
        raise InputError(
            f"relative_humidity: must be between 0 and 100 %, got {_first_bad(rh, bad)} %; {fix}"
        )
    return rh


def _check_co2(co2_mole_fraction: Any) -> np.ndarray:
    x = np.asarray(co2_mole_fraction, dtype=float)
    fix = "give the CO2 mole fraction as a fraction (0.0004 for 400 ppm)."
    _check_finite("co2_mole_fraction", x, "", fix)
    bad = (x < 0.0) | (x >= 1.0)
    if np.any(bad):
        raise InputError(
            f"co2_mole_fraction: must be at least 0 and below 1, got {_first_bad(x, bad)}; {fix}"
        )
    return x


def _warn_outside_cipm_range(t: np.ndarray, p: np.ndarray) -> None:
    t_lo, t_hi = CIPM_TEMPERATURE_RANGE
    p_lo, p_hi = CIPM_PRESSURE_RANGE

    def span(values: np.ndarray, outside: np.ndarray) -> str:
        lo, hi = float(np.min(values[outside])), float(np.max(values[outside]))
        return f"{lo}" if lo == hi else f"{lo} to {hi}"

    parts = []
    t_out = (t < t_lo) | (t > t_hi)
    if np.any(t_out):
        parts.append(f"temperature {span(t, t_out)} °C (stated range 15 to 27 °C)")
    p_out = (p < p_lo) | (p > p_hi)
    if np.any(p_out):
        parts.append(f"pressure {span(p, p_out)} Pa (stated range 60000 to 110000 Pa)")
    if parts:
        warnings.warn(
            "CIPM-2007 air density used outside the range stated by Picard et al. (2008): "
            + "; ".join(parts)
            + ". The result is an extrapolation; its uncertainty is larger than the formula's.",
            CIPMRangeWarning,
            stacklevel=4,
        )


def _saturation_vapour_pressure(temperature_k: np.ndarray) -> np.ndarray:
    """Saturation vapour pressure of pure water, CIPM-2007, Appendix A1 (ref. 1). [Pa]"""
    T = temperature_k
    return np.exp(_A * T**2 + _B * T + _C + _D / T)


def _enhancement_factor(pressure: np.ndarray, temperature: np.ndarray) -> np.ndarray:
    """Water-vapour enhancement factor f(p, t), CIPM-2007, Appendix A1 (ref. 1). [1]"""
    return _ALPHA + _BETA * pressure + _GAMMA * temperature**2


def _compressibility(pressure: np.ndarray, temperature: np.ndarray, x_v: np.ndarray) -> np.ndarray:
    """Compressibility factor Z of moist air, CIPM-2007, Appendix A1 (ref. 1). [1]"""
    t = temperature
    T = t + _ZERO_CELSIUS
    p_T = pressure / T
    return (
        1.0
        - p_T * (_A0 + _A1 * t + _A2 * t**2 + (_B0 + _B1 * t) * x_v + (_C0 + _C1 * t) * x_v**2)
        + p_T**2 * (_D_Z + _E_Z * x_v**2)
    )


def _as_result(value: np.ndarray) -> float | np.ndarray:
    return float(value) if np.ndim(value) == 0 else value


def _cipm_density(
    temperature: Any, pressure: Any, relative_humidity: Any, co2_mole_fraction: Any
) -> float | np.ndarray:
    """CIPM-2007 eq. (1); shared body of the public density functions (ref. 1)."""
    t = _check_temperature(temperature)
    p = _check_pressure(pressure)
    h = _check_relative_humidity(relative_humidity) / 100.0
    x_co2 = _check_co2(co2_mole_fraction)
    _warn_outside_cipm_range(t, p)

    T = t + _ZERO_CELSIUS
    x_v = h * _enhancement_factor(p, t) * _saturation_vapour_pressure(T) / p
    bad = x_v >= 1.0
    if np.any(bad):
        t_b, p_b, bad = np.broadcast_arrays(t, p, bad)
        i = np.flatnonzero(bad)[0]
        raise InputError(
            f"relative_humidity: water vapour would make up all of the air at "
            f"{float(t_b.flat[i])} °C and {float(p_b.flat[i])} Pa (saturation vapour pressure "
            f"exceeds the total pressure); check the temperature and pressure units."
        )
    m_a = (28.96546 + 12.011 * (x_co2 - 0.0004)) * 1e-3
    z = _compressibility(p, t, x_v)
    rho = p * m_a / (z * _R * T) * (1.0 - x_v * (1.0 - _M_V / m_a))
    return _as_result(rho)


def moist_air_density(
    temperature: Any,
    pressure: Any,
    relative_humidity: Any,
    co2_mole_fraction: Any = 0.0004,
) -> float | np.ndarray:
    """Density of moist air by the CIPM-2007 equation (ref. 1, eq. (1) and Appendix A1).

    ``rho = p M_a / (Z R T) * [1 - x_v (1 - M_v / M_a)]`` with
    ``x_v = h f(p, t) p_sv(T) / p``, ``h = relative_humidity / 100``, the saturation vapour
    pressure ``p_sv``, enhancement factor ``f`` and compressibility ``Z`` of Appendix A1, and
    ``M_a = [28.96546 + 12.011 (x_CO2 - 0.0004)] 1e-3 kg/mol``.

    The authors state the formula for 15-27 °C and 60-110 kPa. Outside that range it is still
    evaluated (laboratory air is often a little colder or warmer) and one
    :class:`CIPMRangeWarning` is issued per call; physically impossible inputs raise.

    Parameters
    ----------
    temperature : float or array_like
        Air temperature (ITS-90). [°C]
    pressure : float or array_like
        Absolute air pressure. [Pa]
    relative_humidity : float or array_like
        Relative humidity, 0 to 100. [%]
    co2_mole_fraction : float or array_like, optional
        Mole fraction of carbon dioxide, default 0.0004 (400 µmol/mol). [mol/mol]

    Returns
    -------
    float or numpy.ndarray
        Density of the moist air (a float for scalar inputs). [kg/m^3]

    Raises
    ------
    ValueError
        Temperature at or below absolute zero, non-positive pressure, relative humidity
        outside 0-100 %, CO2 mole fraction outside [0, 1), non-finite input, or a water
        vapour partial pressure that would reach the total pressure.
    """
    return _cipm_density(temperature, pressure, relative_humidity, co2_mole_fraction)


def dry_air_density(
    temperature: Any, pressure: Any, co2_mole_fraction: Any = 0.0004
) -> float | np.ndarray:
    """Density of dry air: the CIPM-2007 equation with zero humidity (ref. 1).

    Parameters
    ----------
    temperature : float or array_like
        Air temperature (ITS-90). [°C]
    pressure : float or array_like
        Absolute air pressure. [Pa]
    co2_mole_fraction : float or array_like, optional
        Mole fraction of carbon dioxide, default 0.0004. [mol/mol]

    Returns
    -------
    float or numpy.ndarray
        Density of dry air. [kg/m^3]
    """
    return _cipm_density(temperature, pressure, 0.0, co2_mole_fraction)


def air_viscosity(temperature: Any) -> float | np.ndarray:
    """Dynamic viscosity of air by Sutherland's law (ref. 2).

    ``mu = mu_ref (T / T_ref)^(3/2) (T_ref + S) / (T + S)`` with ``mu_ref = 1.716e-5 Pa s``,
    ``T_ref = 273.15 K``, ``S = 110.4 K``; the same curve as U.S. Standard Atmosphere 1976,
    ``mu = beta T^1.5 / (T + S)`` with ``beta = 1.458e-6 kg/(s m K^0.5)``. Humidity is
    neglected: its effect on the viscosity of room air is below 1 %.

    Parameters
    ----------
    temperature : float or array_like
        Air temperature. [°C]

    Returns
    -------
    float or numpy.ndarray
        Dynamic viscosity. [Pa s]
    """
    T = _check_temperature(temperature) + _ZERO_CELSIUS
    mu = _MU_REF * (T / _T_REF) ** 1.5 * (_T_REF + _S) / (T + _S)
    return _as_result(mu)


def local_gravity(latitude: Any, height: Any = 0.0) -> float | np.ndarray:
    """Normal gravity of the WGS84 ellipsoid at a latitude and height (ref. 3).

    Constant set pinned: NIMA TR8350.2, 3rd edition, amendment 1 (2000), Table 3.4
    (``a = 6378137 m``, ``1/f = 298.257223563``, ``gamma_e = 9.7803253359 m/s^2``,
    ``gamma_p = 9.8321849378 m/s^2``, ``k = 0.00193185265241``,
    ``e^2 = 6.69437999014e-3``, ``m = 0.00344978650684``). On the ellipsoid the Somigliana
    closed form, eq. (4-1)::

        gamma = gamma_e (1 + k sin^2 phi) / sqrt(1 - e^2 sin^2 phi)

    and above it the second-order free-air expansion, eq. (4-3)::

        gamma_h = gamma [1 - 2/a (1 + f + m - 2 f sin^2 phi) h + 3 h^2 / a^2]

    This is normal (model) gravity: local anomalies of up to a few 1e-4 relative are not
    included; use a measured value where that matters.

    Parameters
    ----------
    latitude : float or array_like
        Geodetic latitude, -90 to 90 (south negative). [deg]
    height : float or array_like, optional
        Height above the WGS84 ellipsoid (close to height above sea level for this
        purpose). [m]

    Returns
    -------
    float or numpy.ndarray
        Normal gravity. [m/s^2]
    """
    lat = np.asarray(latitude, dtype=float)
    fix = "give the geodetic latitude in decimal degrees (south negative)."
    _check_finite("latitude", lat, " deg", fix)
    bad = (lat < -90.0) | (lat > 90.0)
    if np.any(bad):
        raise InputError(
            f"latitude: must be between -90 and 90 degrees, got {_first_bad(lat, bad)} deg; {fix}"
        )
    h = np.asarray(height, dtype=float)
    _check_finite("height", h, " m", "give the height above sea level in metres.")
    s2 = np.sin(np.radians(lat)) ** 2
    gamma = _WGS84_GAMMA_E * (1.0 + _WGS84_K * s2) / np.sqrt(1.0 - _WGS84_E2 * s2)
    a = _WGS84_A
    f = _WGS84_F
    gamma_h = gamma * (1.0 - 2.0 / a * (1.0 + f + _WGS84_M - 2.0 * f * s2) * h + 3.0 * h**2 / a**2)
    return _as_result(gamma_h)


_DEFAULT_VISCOSITY = float(air_viscosity(20.0))


@dataclass(frozen=True)
class Air:
    """Still air around the specimen.

    Parameters
    ----------
    density : float
        Air density. [kg/m^3]
    viscosity : float, optional
        Dynamic viscosity; default Sutherland's law at 20 °C (about 1.81e-5). [Pa s]
    temperature : float or None, optional
        Air temperature, informational when known. [°C]
    pressure : float or None, optional
        Absolute air pressure, informational when known. [Pa]
    relative_humidity : float or None, optional
        Relative humidity, informational when known. [%]
    """

    density: float
    viscosity: float = _DEFAULT_VISCOSITY
    temperature: float | None = None
    pressure: float | None = None
    relative_humidity: float | None = None

    def __post_init__(self) -> None:
        rho = float(self.density)
        if not (math.isfinite(rho) and rho > 0.0):
            raise InputError(
                f"density: must be a positive finite number, got {rho} kg/m^3; give the air "
                f"density in kg/m^3 (about 1.2 near sea level) or use "
                f"Air.from_conditions(temperature, pressure, relative_humidity)."
            )
        mu = float(self.viscosity)
        if not (math.isfinite(mu) and mu > 0.0):
            raise InputError(
                f"viscosity: must be a positive finite number, got {mu} Pa s; give the dynamic "
                f"viscosity in Pa s (about 1.8e-5 for room air) or leave it out for the "
                f"20 °C value."
            )
        object.__setattr__(self, "density", rho)
        object.__setattr__(self, "viscosity", mu)
        checks = (
            ("temperature", _check_temperature),
            ("pressure", _check_pressure),
            ("relative_humidity", _check_relative_humidity),
        )
        for name, check in checks:
            value = getattr(self, name)
            if value is not None:
                if np.ndim(value) != 0:
                    raise InputError(
                        f"{name}: must be a single number or None, got an array of shape "
                        f"{np.shape(value)}; give one value for the whole test."
                    )
                object.__setattr__(self, name, float(check(value)))

    @classmethod
    def from_conditions(
        cls,
        temperature: float = 20.0,
        pressure: float = 101325.0,
        relative_humidity: float = 50.0,
        co2_mole_fraction: float = 0.0004,
    ) -> Air:
        """Air from measured conditions: CIPM-2007 density and Sutherland viscosity.

        Parameters
        ----------
        temperature : float, optional
            Air temperature. [°C]
        pressure : float, optional
            Absolute air pressure. [Pa]
        relative_humidity : float, optional
            Relative humidity, 0 to 100. [%]
        co2_mole_fraction : float, optional
            Mole fraction of carbon dioxide. [mol/mol]

        Returns
        -------
        Air
        """
        return cls(
            density=float(
                moist_air_density(temperature, pressure, relative_humidity, co2_mole_fraction)
            ),
            viscosity=float(air_viscosity(temperature)),
            temperature=float(temperature),
            pressure=float(pressure),
            relative_humidity=float(relative_humidity),
        )

    @classmethod
    def standard(cls) -> Air:
        """ISA / U.S. Standard Atmosphere 1976 sea level: 1.225 kg/m^3, 1.7894e-5 Pa s,
        15 °C, 101325 Pa, dry.

        Returns
        -------
        Air
        """
        return cls(
            density=1.225,
            viscosity=1.7894e-5,
            temperature=15.0,
            pressure=101325.0,
            relative_humidity=0.0,
        )

    def to_dict(self) -> dict[str, float | None]:
        """Plain dictionary of the fields (SI; temperature in °C, humidity in %)."""
        return asdict(self)

    @classmethod
    def from_dict(cls, data: dict[str, Any]) -> Air:
        """Inverse of :meth:`to_dict`; unknown keys or a missing density raise ValueError."""
        known = {"density", "viscosity", "temperature", "pressure", "relative_humidity"}
        unknown = sorted(set(data) - known)
        if unknown:
            raise InputError(f"air: unknown key(s) {unknown}; valid keys are {sorted(known)}.")
        if "density" not in data:
            raise InputError("air: key 'density' is missing; give the air density in kg/m^3.")
        return cls(**data)
