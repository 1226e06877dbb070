"""Barometric pressure by altitude and its inverse: the ICAO standard atmosphere and a mountain model atmosphere.

Two models, chosen by name (an unknown name raises a ``ValueError`` listing the valid ones):

``"isa"``
    ICAO Standard Atmosphere (Doc 7488/3, 1993), identical to the U.S. Standard Atmosphere
    1976 below 32 km, as the ``ambiance`` package defines it [ICAO1993]_: altox evaluates
    ambiance's layer formulas with ambiance's own constants in closed form, forward and
    inverse, and a test holds the result to ambiance itself within 1e-9 over ambiance's
    whole range (-5,004 to 81,020 m).  Input is *geometric* altitude.  Aviation's pressure altitude is, by definition, the ISA altitude of the
    ambient pressure; altox reads flight levels and cabin altitudes as pressure altitudes
    and converts them with :func:`altitude_for_pressure`.
``"mountain"``
    The model atmosphere of West (1996) for mountain sites,
    ``PB = exp(6.63268 - 0.1112 h - 0.00149 h**2)`` Torr with ``h`` in km [West1996]_.
    It fits measured pressures on high mountains near latitude 30 degrees N in the climbing
    seasons (the highest summit: about 253 Torr measured against 236 Torr in the ISA,
    [West1983a]_).  Pressures are lower at high latitudes and in winter: West (1996)
    tabulates sites near 63 degrees N several Torr below the model.  altox accepts the model
    from -500 m to 9,000 m.

A measured pressure, where known, overrides both (see :func:`altox.assess`).

References
----------
.. [ICAO1993] ICAO. Manual of the ICAO Standard Atmosphere, Doc 7488/3, 3rd ed., 1993.
.. [West1996] West JB. Prediction of barometric pressures at high altitudes with the use
   of model atmospheres. J Appl Physiol 1996;81:1850-1854.
.. [West1983a] West JB, et al. Barometric pressures at extreme altitudes on Mt. Everest:
   physiological significance. J Appl Physiol 1983;54:1188-1194.
"""

from __future__ import annotations

import numpy as np

from altox.errors import OutOfRangeError
from altox.units import PA_PER_MMHG, PA_PER_TORR

ATMOSPHERES = ("isa", "mountain")

# ambiance's documented domain (geometric altitude, m)
ISA_MIN_M = -5004.0
ISA_MAX_M = 81020.0
# the mountain model: fitted to sites up to the highest summit; a little headroom
MOUNTAIN_MIN_M = -500.0
MOUNTAIN_MAX_M = 9000.0

# West (1996) coefficients, PB in Torr, h in km
_WEST_A = 6.63268
_WEST_B = 0.1112
_WEST_C = 0.00149
_TORR_TO_MMHG = PA_PER_TORR / PA_PER_MMHG  # 1.00000014: Torr and mmHg differ by 1.4e-7

SEA_LEVEL_MMHG = 101325.0 / PA_PER_MMHG    # ISA sea-level pressure, 760.0 mmHg


def _check_name(atmosphere: str) -> str:
    if atmosphere not in ATMOSPHERES:
        raise ValueError(f"unknown atmosphere {atmosphere!r}; valid: {', '.join(ATMOSPHERES)}")
    return atmosphere


def _check_range(values, lo, hi, what, unit, model):
    arr = np.asarray(values, dtype=float)
    bad = ~np.isfinite(arr) | (arr < lo) | (arr > hi)
    if np.any(bad):
        first = arr[bad].flat[0] if arr.ndim else float(arr)
        raise OutOfRangeError(
            f"{what} {first:g} {unit} is outside the {model} model's range "
            f"({lo:g} to {hi:g} {unit}).", field=what, value=float(first),
            expected=f"{lo:g} to {hi:g} {unit}")
    return arr


def _shape_like(result, template):
    """Give ``result`` the shape of ``template``; a Python float for scalar input."""
    result = np.asarray(result, dtype=float).reshape(np.shape(template))
    return float(result) if result.ndim == 0 else result


#: ICAO standard atmosphere layer table (Doc 7488/3): geopotential base [m], base temperature [K],
#: lapse rate [K/m], base pressure [Pa]; the same numbers as ambiance's ``CONST.LAYER_SPEC_PROP``
#: (a test asserts they are identical), kept here so that a plan does not import ambiance (and
#: scipy with it) just to read them. ambiance stays the reference implementation.
ISA_LAYERS = (
    (-5000.0, 320.65, -0.0065, 177687.0),
    (0.0, 288.15, -0.0065, 101325.0),
    (11000.0, 216.65, 0.0, 22632.0),
    (20000.0, 216.65, 0.001, 5474.87),
    (32000.0, 228.65, 0.0028, 868.014),
    (47000.0, 270.65, 0.0, 110.906),
    (51000.0, 270.65, -0.0028, 66.9384),
    (71000.0, 214.65, -0.002, 3.95639),
    (80000.0, 196.65, -0.002, 0.886272),
)
ISA_G0_M_S2 = 9.80665          # standard gravity
ISA_R_J_KG_K = 287.05287       # specific gas constant of air
ISA_EARTH_RADIUS_M = 6356766.0  # nominal Earth radius for geopotential height
_ISA_TABLE = None


def _isa_layers():
    """Layer table of the standard atmosphere as arrays: geopotential base [m], base temperature [K],
    lapse rate [K/m], base pressure [Pa], then g0, R and the Earth's radius."""
    global _ISA_TABLE
    if _ISA_TABLE is None:
        h_base, t_base, beta, p_base = (np.array(col, dtype=float) for col in zip(*ISA_LAYERS))
        _ISA_TABLE = (h_base, t_base, beta, p_base, ISA_G0_M_S2, ISA_R_J_KG_K, ISA_EARTH_RADIUS_M)
    return _ISA_TABLE


def isa_pressure_pa(altitude_m):
    """ISA pressure at geometric altitude: the layer formulas that ``ambiance`` evaluates, in closed form.

    ``H = r h / (r + h)``; in a layer with lapse ``beta``:
    ``p = p_b (1 + beta/T_b (H - H_b))^(-g0 / (R beta))``, isothermal: ``p = p_b exp(-g0 (H - H_b) / (R T_b))``.
    Layer constants are ambiance's (:data:`ISA_LAYERS`); a test holds this to ambiance within 1e-9 relative over its
    whole range. No range check here (see :func:`barometric_pressure`). [Pa]
    """
    h_base, t_base, beta, p_base, g0, r_gas, r_earth = _isa_layers()
    h = np.asarray(altitude_m, dtype=float)
    geop = r_earth * h / (r_earth + h)
    one = _single_layer(geop, h_base)
    if one is not None:   # all in one layer (the usual case): scalar constants, one formula
        dh = geop - h_base[one]
        if beta[one] != 0.0:
            with np.errstate(invalid="ignore", divide="ignore"):
                return p_base[one] * (1.0 + (beta[one] / t_base[one]) * dh) ** (-g0 / (r_gas * beta[one]))
        return p_base[one] * np.exp(-g0 * dh / (r_gas * t_base[one]))
    i = np.clip(np.searchsorted(h_base, geop, side="right") - 1, 0, h_base.size - 2)
    hb, tb, b, pb = h_base[i], t_base[i], beta[i], p_base[i]
    dh = geop - hb
    safe_b = np.where(b != 0.0, b, 1.0)
    with np.errstate(invalid="ignore", divide="ignore"):
        grad = pb * (1.0 + (b / tb) * dh) ** (-g0 / (r_gas * safe_b))
    iso = pb * np.exp(-g0 * dh / (r_gas * tb))
    return np.where(b != 0.0, grad, iso)


def _single_layer(values, bases):
    """Index of the layer holding every value when they all lie in one (by their extremes), else None.

    ``bases`` increase; layer i holds ``bases[i] <= v < bases[i+1]`` (the first and last layers
    extend outwards, as in the clipped search of the general path)."""
    v = np.asarray(values)
    if v.size == 0:
        return None
    lo, hi = float(v.min()), float(v.max())
    if not (np.isfinite(lo) and np.isfinite(hi)):
        return None
    last = bases.size - 2
    i_lo = min(max(int(np.searchsorted(bases, lo, side="right")) - 1, 0), last)
    i_hi = min(max(int(np.searchsorted(bases, hi, side="right")) - 1, 0), last)
    return i_lo if i_lo == i_hi else None


def isa_altitude_for_pressure_m(p_pa):
    """Inverse of :func:`isa_pressure_pa` in closed form: geometric altitude of an ISA pressure. [m]"""
    h_base, t_base, beta, p_base, g0, r_gas, r_earth = _isa_layers()
    p = np.asarray(p_pa, dtype=float)
    # base pressures fall with height: layer i holds p_base[i+1] < p <= p_base[i]
    one = _single_layer(-p, -p_base)
    if one is not None:
        hb, tb, b, pb = h_base[one], t_base[one], beta[one], p_base[one]
        if b != 0.0:
            geop = hb + (tb / b) * ((p / pb) ** (-r_gas * b / g0) - 1.0)
        else:
            geop = hb - r_gas * tb / g0 * np.log(p / pb)
        return r_earth * geop / (r_earth - geop)
    i = np.clip(np.searchsorted(-p_base, -p, side="right") - 1, 0, h_base.size - 2)
    hb, tb, b, pb = h_base[i], t_base[i], beta[i], p_base[i]
    safe_b = np.where(b != 0.0, b, 1.0)
    grad = hb + (tb / safe_b) * ((p / pb) ** (-r_gas * safe_b / g0) - 1.0)
    iso = hb - r_gas * tb / g0 * np.log(p / pb)
    geop = np.where(b != 0.0, grad, iso)
    return r_earth * geop / (r_earth - geop)


def barometric_pressure(altitude_m, atmosphere: str = "isa"):
    """Barometric pressure at a geometric altitude.

    Parameters
    ----------
    altitude_m : numeric
        Geometric altitude above mean sea level. [m]
    atmosphere : {'isa', 'mountain'}
        ``'isa'``: ICAO standard atmosphere via ``ambiance`` (-5004 to 81020 m).
        ``'mountain'``: West (1996) model atmosphere for mountain sites (-500 to 9000 m).

    Returns
    -------
    pb_mmhg : numeric
        Barometric pressure, same shape as ``altitude_m``. [mmHg]

    Raises
    ------
    OutOfRangeError
        An altitude outside the model's range, NaN or infinity.

    Notes
    -----
    West (1996): ``PB[Torr] = exp(6.63268 - 0.1112 h - 0.00149 h^2)``, ``h`` in km.

    Examples
    --------
    >>> round(barometric_pressure(0.0), 2)
    760.0
    >>> round(barometric_pressure(8848.0, "mountain"), 1)
    252.7
    """
    _check_name(atmosphere)
    if atmosphere == "isa":
        h = _check_range(altitude_m, ISA_MIN_M, ISA_MAX_M, "altitude", "m", "ICAO standard atmosphere")
        return _shape_like(isa_pressure_pa(h) / PA_PER_MMHG, altitude_m)
    h = _check_range(altitude_m, MOUNTAIN_MIN_M, MOUNTAIN_MAX_M, "altitude", "m", "mountain")
    h_km = h / 1000.0
    pb = np.exp(_WEST_A - _WEST_B * h_km - _WEST_C * h_km**2) * _TORR_TO_MMHG
    return _shape_like(pb, altitude_m)


_PRESSURE_SPAN: dict = {}


def _pressure_span(atmosphere: str) -> tuple[float, float]:
    """(lowest, highest) pressure of a model over its altitude range [mmHg], computed once."""
    if atmosphere not in _PRESSURE_SPAN:
        top, bottom = (ISA_MAX_M, ISA_MIN_M) if atmosphere == "isa" else (MOUNTAIN_MAX_M, MOUNTAIN_MIN_M)
        _PRESSURE_SPAN[atmosphere] = (float(barometric_pressure(top, atmosphere)),
                                      float(barometric_pressure(bottom, atmosphere)))
    return _PRESSURE_SPAN[atmosphere]


def altitude_for_pressure(pb_mmhg, atmosphere: str = "isa"):
    """Geometric altitude at which the model atmosphere has a given pressure.

    For ``'isa'`` this is the pressure altitude of aviation expressed as geometric
    altitude of the standard atmosphere (ambiance's ``from_pressure``).  For ``'mountain'``
    the West (1996) quadratic in ``h`` is solved in closed form.

    Parameters
    ----------
    pb_mmhg : numeric
        Barometric pressure. [mmHg]
    atmosphere : {'isa', 'mountain'}

    Returns
    -------
    altitude_m : numeric
        Geometric altitude, same shape as ``pb_mmhg``. [m]

    Raises
    ------
    OutOfRangeError
        A pressure outside the pressures the model spans over its altitude range.
    """
    _check_name(atmosphere)
    lo, hi = _pressure_span(atmosphere)
    if atmosphere == "isa":
        p = _check_range(pb_mmhg, lo, hi, "pressure", "mmHg", "ICAO standard atmosphere")
        return _shape_like(isa_altitude_for_pressure_m(p * PA_PER_MMHG), pb_mmhg)
    p = _check_range(pb_mmhg, lo, hi, "pressure", "mmHg", "mountain")
    c = np.log(p / _TORR_TO_MMHG) - _WEST_A
    # 0.00149 h^2 + 0.1112 h + c = 0, positive root
    h_km = (-_WEST_B + np.sqrt(_WEST_B**2 - 4.0 * _WEST_C * c)) / (2.0 * _WEST_C)
    return _shape_like(h_km * 1000.0, pb_mmhg)


def pressure_altitude_ft_to_mmhg(pressure_altitude_ft):
    """Pressure of a pressure altitude (flight level, cabin altitude) given in feet. [mmHg]

    Pressure altitude is the ISA geopotential height of the pressure; ambiance takes
    geometric height, so the geopotential value is converted first (the difference is
    about 0.15 % at 40,000 ft).
    """
    from altox.units import M_PER_FT

    r_earth = _isa_layers()[-1]
    geop_m = np.asarray(pressure_altitude_ft, dtype=float) * M_PER_FT
    geom_m = r_earth * geop_m / (r_earth - geop_m)
    return barometric_pressure(_shape_like(geom_m, pressure_altitude_ft), "isa")


def pressure_altitude_ft(pb_mmhg):
    """Pressure altitude (ISA geopotential height of the pressure) in feet. [ft]"""
    from altox.units import M_PER_FT

    r_earth = _isa_layers()[-1]
    geom_m = np.asarray(altitude_for_pressure(pb_mmhg, "isa"), dtype=float)
    geop_m = r_earth * geom_m / (r_earth + geom_m)
    return _shape_like(geop_m / M_PER_FT, pb_mmhg)
