"""The pn junction: thermal voltage, saturation current against temperature, the
current of a junction with series resistance, and junction-voltage limiting.

Pure functions over numpy arrays, shared by diodes, LEDs, zeners and bipolar
transistors. Saturation currents travel as natural logarithms (`log_is`, ln of A)
so that a breakdown branch with Is = 1e-90 A or a hot junction cannot underflow.
"""

from __future__ import annotations

import numpy as np
from scipy.special import wrightomega

BOLTZMANN = 1.380649e-23  # J/K, exact by definition (SI Brochure, 9th ed., 2019, Table 1)
ELEMENTARY_CHARGE = 1.602176634e-19  # C, exact by definition (same source)
T_REFERENCE = 298.15  # K: 25 degC, where device parameters are given (docs/models.md)
EG_SILICON = 1.11  # eV, band gap used by the temperature law (Massobrio & Antognetti, 1993; from memory)
IS_TEMPERATURE_EXPONENT = 3.0  # saturation-current temperature exponent of silicon (same source; from memory)
SHUNT = 1e-12  # S across every junction and channel, so a reverse-biased or off part never leaves a net without a slope
LOG_I_MAX = np.log(1e6)  # ln(A): above 1 MA a junction's exponential is continued along its tangent


def thermal_voltage(temperature: float | np.ndarray) -> float | np.ndarray:
    """Vt = k T / q in volts, T in kelvin."""
    return BOLTZMANN * temperature / ELEMENTARY_CHARGE


def log_isat_at(log_is_ref: np.ndarray, ideality: np.ndarray, temperature: float,
                band_gap: float | np.ndarray = EG_SILICON) -> np.ndarray:
    """ln Is(T) from ln Is(25 degC); `band_gap` in eV.

    Is(T) = Is(T0) (T/T0)^(m/n) exp(Eg/(n Vt(T)) (T/T0 - 1)), with T0 = 298.15 K,
    where m is the temperature exponent of the saturation current; for silicon
    Eg = 1.11 eV and m = 3 (Sze & Ng, "Physics of Semiconductor
    Devices", 3rd ed., 2007, ch. 2; Massobrio & Antognetti, "Semiconductor Device
    Modeling", 2nd ed., 1993, ch. 1 — chapters and edition from memory).
    """
    ratio = temperature / T_REFERENCE
    return (log_is_ref + (IS_TEMPERATURE_EXPONENT / ideality) * np.log(ratio)
            + band_gap / (ideality * thermal_voltage(temperature)) * (ratio - 1.0))


def log_isat_from_point(volts: np.ndarray, amps: np.ndarray, nvt: np.ndarray, rseries: np.ndarray) -> np.ndarray:
    """ln Is of a junction that carries `amps` (A) at `volts` (V) across it and its series resistance.

    Shockley's law solved for Is: Is = I / (exp((V - I Rs)/(n Vt)) - 1); the
    logarithm of the denominator is taken as y + ln(1 - exp(-y)) to stay finite.
    Callers check V - I Rs > 0 first.
    """
    y = (volts - amps * rseries) / nvt
    return np.log(amps) - (y + np.log(-np.expm1(-y)))


def current(v: np.ndarray, log_is: np.ndarray, nvt: np.ndarray, rseries: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Current (A) through a junction in series with `rseries` (Ω) at `v` (V) across both, and dI/dV (S).

    Without series resistance: Shockley's law I = Is (exp(V/(n Vt)) - 1) (Shockley,
    Bell System Technical Journal, 1949), continued along its tangent above 1 MA so
    that no guess can overflow. With series resistance the implicit equation
    V = I Rs + n Vt ln(I/Is + 1) has the exact solution
    I = (n Vt / Rs) W(Is Rs/(n Vt) exp((V + Is Rs)/(n Vt))) - Is (Banwell & Jayakumar,
    "Exact analytical solution for current flow through diode with series
    resistance", Electronics Letters, 2000); W(exp(L)) is the Wright omega function
    of L, evaluated without forming exp(L), and dI/dV = w / (Rs (1 + w)).
    """
    i, g = np.empty_like(v), np.empty_like(v)
    bare = rseries <= 0.0
    i[bare], g[bare] = _shockley(v[bare], log_is[bare], nvt[bare])
    i[~bare], g[~bare] = _lambert(v[~bare], log_is[~bare], nvt[~bare], rseries[~bare])
    return i, g


def _shockley(v, log_is, nvt):
    exponent = log_is + v / nvt  # ln of the current's exponential part, in ln(A)
    capped = np.exp(np.minimum(exponent, LOG_I_MAX))
    i = capped * (1.0 + np.maximum(exponent - LOG_I_MAX, 0.0)) - np.exp(log_is)
    return i, capped / nvt


def _lambert(v, log_is, nvt, rseries):
    isat = np.exp(log_is)
    w = wrightomega(log_is + np.log(rseries / nvt) + (v + isat * rseries) / nvt).real
    return nvt / rseries * w - isat, w / (rseries * (1.0 + w))


def overdriven(v: np.ndarray, log_is: np.ndarray, nvt: np.ndarray, rseries: np.ndarray) -> np.ndarray:
    """True where a junction without series resistance sits on its tangent continuation (above 1 MA)."""
    return (rseries <= 0.0) & (log_is + v / nvt > LOG_I_MAX)


def limit(v_new: np.ndarray, v_old: np.ndarray, log_is: np.ndarray, nvt: np.ndarray,
          rseries: np.ndarray) -> np.ndarray:
    """Junction-voltage limiting: the voltage a Newton step may reach from `v_old` toward `v_new`.

    Above the critical voltage Vc = n Vt ln(n Vt / (sqrt(2) Is)), where the junction's
    conductance passes about 1/sqrt(2) S, one Newton step on the exponential would
    multiply the current by exp(dV/(n Vt)). There the step is replaced by the voltage
    whose current the linearised junction predicts, n Vt ln(1 + dV/(n Vt)), taken from
    the larger of the old voltage and Vc; below Vc and downward, steps are free
    (logarithmic limiting as described by Vlach & Singhal, "Computer Methods for
    Circuit Analysis and Design", 1983, ch. 10, and Najm, "Circuit Simulation", 2010,
    ch. 5 — chapters from memory). A junction with series resistance grows only
    linearly at high current and is not limited.
    """
    critical = nvt * (np.log(nvt / np.sqrt(2.0)) - log_is)
    base = np.maximum(v_old, critical)
    limited = (rseries <= 0.0) & (v_new > base + 2.0 * nvt)
    safe = np.where(limited, v_new - base, 0.0)
    return np.where(limited, base + nvt * np.log1p(safe / nvt), v_new)


def step_fraction(v_new: np.ndarray, v_old: np.ndarray, v_limited: np.ndarray) -> float:
    """The largest fraction of a step that keeps every junction within its limited voltage."""
    step = v_new - v_old
    moved = np.abs(step) > 0.0
    if not np.any(moved):
        return 1.0
    return float(np.min(np.clip((v_limited[moved] - v_old[moved]) / step[moved], 0.0, 1.0), initial=1.0))
