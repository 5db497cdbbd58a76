"""Physical constants, the thermal voltage, junction laws and Newton voltage limiting.

References:
- k and q: CODATA 2018 exact values (via scipy.constants).
- Junction depletion capacitance and its linear extension above FC*PB:
  Nagel, SPICE2 (ERL M520, 1975); Antognetti and Massobrio, Semiconductor
  Device Modeling with SPICE, 2nd ed. (1993), ch. 1-2.
- Voltage limiting (``pnjlim``, ``fetlim``, ``limvds``): the SPICE2/SPICE3
  Newton safeguards, written here from their published description (Nagel 1975,
  ch. 4), recalled from memory.
"""

from __future__ import annotations

import numpy as np
from scipy import constants

K_BOLTZMANN = constants.k  # J/K, exact (CODATA 2018)
Q_ELECTRON = constants.e  # C, exact (CODATA 2018)
CELSIUS_TO_KELVIN = constants.zero_Celsius  # 273.15
#: Default nominal temperature of model cards, Celsius (SPICE convention).
TNOM_C = 27.0
#: Permittivity of SiO2: 3.9 * eps0 (handbook relative permittivity 3.9, from memory).
EPS_OX = 3.9 * constants.epsilon_0
#: Permittivity of silicon: 11.7 * eps0 (handbook value, from memory).
EPS_SI = 11.7 * constants.epsilon_0
#: Largest exponent argument before the exponential is continued linearly (no overflow).
EXP_LIMIT = 80.0


def thermal_voltage(temp_c: float) -> float:
    """kT/q.

    Parameters
    ----------
    temp_c : float
        Temperature (degrees Celsius).

    Returns
    -------
    float
        Volts.
    """
    return K_BOLTZMANN * (temp_c + CELSIUS_TO_KELVIN) / Q_ELECTRON


def safe_exp(x: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """exp(x) and its derivative, continued linearly above :data:`EXP_LIMIT`.

    Parameters
    ----------
    x : ndarray

    Returns
    -------
    value, slope : ndarray, shape of ``x``
    """
    x = np.asarray(x, dtype=float)
    clipped = np.minimum(x, EXP_LIMIT)
    e = np.exp(clipped)
    value = np.where(x > EXP_LIMIT, e * (1.0 + x - EXP_LIMIT), e)
    return value, e


def diode_current(v: np.ndarray, i_sat: np.ndarray, n_vt: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Shockley diode law ``I = IS (exp(v/(N Vt)) - 1)`` and its conductance.

    Parameters
    ----------
    v : ndarray
        Junction voltages (V).
    i_sat : ndarray
        Saturation currents IS (A).
    n_vt : ndarray
        Emission coefficient times the thermal voltage (V).

    Returns
    -------
    current, conductance : ndarray, shape of ``v``
        Amperes and siemens.
    """
    e, de = safe_exp(v / n_vt)
    return i_sat * (e - 1.0), i_sat * de / n_vt


def depletion_capacitance(v: np.ndarray, cj0: np.ndarray, pb: np.ndarray, m: np.ndarray, fc: np.ndarray) -> np.ndarray:
    """Junction depletion capacitance at forward voltage ``v``.

    Below ``FC*PB``: ``Cj0 / (1 - v/PB)^M``.  Above it the standard linear extension
    ``Cj0 / (1-FC)^(1+M) * (1 - FC(1+M) + M v/PB)`` (Nagel 1975).

    Parameters
    ----------
    v : ndarray
        Forward voltages (V).
    cj0 : ndarray
        Zero-bias capacitances (F).
    pb, m, fc : ndarray
        Junction potential (V), grading coefficient and forward-bias coefficient.

    Returns
    -------
    ndarray, shape of ``v``
        Farads.
    """
    v = np.asarray(v, dtype=float)
    cj0 = np.asarray(cj0, dtype=float)
    below = v < fc * pb
    ratio = np.where(below, 1.0 - v / pb, 1.0)
    c_below = cj0 / np.power(np.maximum(ratio, 1e-12), m)
    c_above = cj0 / np.power(1.0 - fc, 1.0 + m) * (1.0 - fc * (1.0 + m) + m * v / pb)
    return np.where(cj0 == 0, 0.0, np.where(below, c_below, c_above))


def critical_voltage(i_sat: np.ndarray, n_vt: np.ndarray) -> np.ndarray:
    """``Vcrit = N Vt ln(N Vt / (sqrt(2) IS))``: where limiting of a junction starts (Nagel 1975).

    Parameters
    ----------
    i_sat : ndarray
        Saturation currents (A).
    n_vt : ndarray
        Emission coefficient times the thermal voltage (V).

    Returns
    -------
    ndarray
        Volts.
    """
    i_sat = np.maximum(np.asarray(i_sat, dtype=float), 1e-300)
    return n_vt * np.log(n_vt / (np.sqrt(2.0) * i_sat))


def pnjlim(vnew: np.ndarray, vold: np.ndarray, n_vt: np.ndarray, vcrit: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Limit the step of a junction voltage above ``vcrit`` to a logarithmic one (Nagel 1975).

    Parameters
    ----------
    vnew, vold : ndarray
        The Newton step's new and the previous junction voltages (V).
    n_vt : ndarray
        Emission coefficient times the thermal voltage (V).
    vcrit : ndarray
        :func:`critical_voltage` (V).

    Returns
    -------
    limited : ndarray
        Volts.
    changed : ndarray of bool
        Where the step was limited.
    """
    vnew = np.asarray(vnew, dtype=float)
    big = (vnew > vcrit) & (np.abs(vnew - vold) > 2.0 * n_vt)
    arg = 1.0 + (vnew - vold) / n_vt
    from_old = np.where(arg > 0, vold + n_vt * np.log(np.maximum(arg, 1e-300)), vcrit)
    from_zero = n_vt * np.log(np.maximum(vnew / n_vt, 1e-300))
    limited = np.where(vold > 0, from_old, from_zero)
    out = np.where(big, limited, vnew)
    return out, big & (out != vnew)


def fetlim(vnew: np.ndarray, vold: np.ndarray, vto: np.ndarray) -> np.ndarray:
    """Limit the step of a FET gate-source voltage around its threshold (Nagel 1975).

    Parameters
    ----------
    vnew, vold : ndarray
        New and previous gate-source voltages (V).
    vto : ndarray
        Thresholds (V).

    Returns
    -------
    ndarray
        The limited voltages (V).
    """
    vnew = np.asarray(vnew, dtype=float).copy()
    vold = np.asarray(vold, dtype=float)
    vtsthi = np.abs(2.0 * (vold - vto)) + 2.0
    vtstlo = vtsthi / 2.0 + 2.0
    vtox = vto + 3.5
    delv = vnew - vold
    on = vold >= vto
    deep = vold >= vtox
    out = vnew.copy()
    # on, deep in strong inversion
    m = on & deep & (delv <= 0) & (vnew >= vtox) & (-delv > vtstlo)
    out = np.where(m, vold - vtstlo, out)
    m = on & deep & (delv <= 0) & (vnew < vtox)
    out = np.where(m, np.maximum(vnew, vto + 2.0), out)
    m = on & deep & (delv > 0) & (delv >= vtsthi)
    out = np.where(m, vold + vtsthi, out)
    # on, near threshold
    m = on & ~deep & (delv <= 0)
    out = np.where(m, np.maximum(vnew, vto - 0.5), out)
    m = on & ~deep & (delv > 0)
    out = np.where(m, np.minimum(vnew, vto + 4.0), out)
    # off
    m = ~on & (delv <= 0) & (-delv > vtsthi)
    out = np.where(m, vold - vtsthi, out)
    vtemp = vto + 0.5
    m = ~on & (delv > 0) & (vnew <= vtemp) & (delv > vtstlo)
    out = np.where(m, vold + vtstlo, out)
    m = ~on & (delv > 0) & (vnew > vtemp)
    out = np.where(m, vtemp, out)
    return out


def limvds(vnew: np.ndarray, vold: np.ndarray) -> np.ndarray:
    """Limit the step of a FET drain-source voltage (Nagel 1975).

    Parameters
    ----------
    vnew, vold : ndarray
        New and previous drain-source voltages (V).

    Returns
    -------
    ndarray
        The limited voltages (V).
    """
    vnew = np.asarray(vnew, dtype=float)
    high = vold >= 3.5
    up = vnew > vold
    out = np.where(high & up, np.minimum(vnew, 3.0 * vold + 2.0), vnew)
    out = np.where(high & ~up & (vnew < 3.5), np.maximum(vnew, 2.0), out)
    out = np.where(~high & up, np.minimum(vnew, 4.0), out)
    out = np.where(~high & ~up, np.maximum(vnew, -0.5), out)
    return out


# -- temperature ----------------------------------------------------------------

def limit_fet(vgs: np.ndarray, vds: np.ndarray, old_gs: np.ndarray, old_ds: np.ndarray,
              von: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """A MOSFET's Newton step limited (normalized frame): forward (old VDS >= 0) VGS by
    :func:`fetlim` then VDS by :func:`limvds`; reverse, VGD then -VDS.

    Parameters
    ----------
    vgs, vds : ndarray
        The new iterate's gate-source and drain-source voltages (V).
    old_gs, old_ds : ndarray
        The previous iterate's (V).
    von : ndarray
        The threshold voltage at the previous iterate (V).

    Returns
    -------
    vgs, vds : ndarray
        The limited voltages.
    """
    vgd = vgs - vds
    fwd = old_ds >= 0
    f_vgs = fetlim(vgs, old_gs, von)
    f_vds = limvds(f_vgs - vgd, old_ds)
    r_vgd = fetlim(vgd, old_gs - old_ds, von)
    r_vds = -limvds(-(vgs - r_vgd), -old_ds)
    return np.where(fwd, f_vgs, r_vgd + r_vds), np.where(fwd, f_vds, r_vds)


def silicon_gap(temp_k: float) -> float:
    """Band gap of silicon, the Varshni form SPICE uses: 1.16 - 7.02e-4 T^2 / (T + 1108).

    Parameters
    ----------
    temp_k : float
        Temperature (K).

    Returns
    -------
    float
        Electron-volts.
    """
    return 1.16 - 7.02e-4 * temp_k * temp_k / (temp_k + 1108.0)


def scale_saturation_current(i_sat: np.ndarray, temp_c: float, tnom_c: float, eg: np.ndarray, xti: np.ndarray, n: np.ndarray) -> np.ndarray:
    """``IS(T) = IS (T/Tnom)^(XTI/N) exp((T/Tnom - 1) EG / (N Vt(T)))`` (Nagel 1975).

    Parameters
    ----------
    i_sat : ndarray
        IS at ``tnom_c`` (A).
    temp_c, tnom_c : float
        Temperature and the card's nominal temperature (degrees Celsius).
    eg : ndarray
        Band gap (eV).
    xti, n : ndarray
        Saturation-current temperature exponent and emission coefficient.

    Returns
    -------
    ndarray
        Amperes.
    """
    if temp_c == tnom_c:
        return np.asarray(i_sat, dtype=float)
    t = temp_c + CELSIUS_TO_KELVIN
    t0 = tnom_c + CELSIUS_TO_KELVIN
    vt = thermal_voltage(temp_c)
    ratio = t / t0
    return i_sat * np.power(ratio, xti / n) * np.exp((ratio - 1.0) * eg / (n * vt))


def scale_junction_potential(pb: np.ndarray, temp_c: float, tnom_c: float) -> np.ndarray:
    """``PB(T) = PB T/Tnom - 3 Vt ln(T/Tnom) - Eg(Tnom) T/Tnom + Eg(T)`` (Nagel 1975).

    Parameters
    ----------
    pb : ndarray
        Junction potential at ``tnom_c`` (V).
    temp_c, tnom_c : float
        Temperature and nominal temperature (degrees Celsius).

    Returns
    -------
    ndarray
        Volts.
    """
    if temp_c == tnom_c:
        return np.asarray(pb, dtype=float)
    t = temp_c + CELSIUS_TO_KELVIN
    t0 = tnom_c + CELSIUS_TO_KELVIN
    ratio = t / t0
    vt = thermal_voltage(temp_c)
    return pb * ratio - 3.0 * vt * np.log(ratio) - silicon_gap(t0) * ratio + silicon_gap(t)
