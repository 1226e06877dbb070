"""Time of useful consciousness: the published table of how long a person breathing air stays able to act after a sudden exposure to a cabin pressure altitude, interpolated as a range."""

from __future__ import annotations

import numpy as np

from altox.errors import OutOfRangeError
from altox.yamlload import load_data_file

#: where an altitude lies against the table
TUC_BELOW, TUC_WITHIN, TUC_ABOVE = -1, 0, 1


def tuc_table() -> dict:
    """The TUC table: ``altitude_ft``, ``min_s``, ``max_s`` arrays, the rows with their sources,
    ``rapid_decompression_factor``, ``interpolation`` and ``caution``."""
    data = load_data_file("tuc")
    rows = sorted(data["rows"], key=lambda r: r["altitude_ft"])
    return {"altitude_ft": np.array([r["altitude_ft"] for r in rows], dtype=float),
            "min_s": np.array([r["min_s"] for r in rows], dtype=float),
            "max_s": np.array([r["max_s"] for r in rows], dtype=float),
            "rows": rows, "rapid_decompression_factor": float(data["rapid_decompression_factor"]),
            "rapid_decompression_source": data["rapid_decompression_source"],
            "interpolation": data["interpolation"], "caution": data["caution"]}


def tuc_range_s(altitude_ft):
    """Time of useful consciousness at a cabin pressure altitude, as a range. [s]

    Parameters
    ----------
    altitude_ft : numeric
        Cabin pressure altitude (after a decompression, the aircraft's). [ft]

    Returns
    -------
    dict
        ``min_s``, ``max_s`` (interpolated log-linearly between tabulated altitudes;
        ``min_s`` is NaN below the table, where ``max_s`` is the lowest row's upper bound, to
        be read "more than"), ``rapid_min_s`` (``min_s`` times the rapid-decompression
        factor), ``position`` (:data:`TUC_BELOW`, :data:`TUC_WITHIN` or :data:`TUC_ABOVE`).

    Examples
    --------
    >>> tuc_range_s(35000.0)["min_s"], tuc_range_s(35000.0)["max_s"]
    (30.0, 60.0)
    """
    t = tuc_table()
    a = np.asarray(altitude_ft, dtype=float)
    if np.any(~np.isfinite(a)):
        raise OutOfRangeError("the altitude must be a finite number of feet", field="altitude",
                              expected="a pressure altitude in ft")
    alt = t["altitude_ft"]
    lo_b = np.exp(np.interp(a, alt, np.log(t["min_s"])))
    hi_b = np.exp(np.interp(a, alt, np.log(t["max_s"])))
    position = np.where(a < alt[0], TUC_BELOW, np.where(a > alt[-1], TUC_ABOVE, TUC_WITHIN))
    lo_b = np.where(position == TUC_BELOW, np.nan, lo_b)
    hi_b = np.where(position == TUC_BELOW, t["max_s"][0], hi_b)
    return {"min_s": _scalar(lo_b), "max_s": _scalar(hi_b),
            "rapid_min_s": _scalar(lo_b * t["rapid_decompression_factor"]),
            "position": _scalar(position)}


def _scalar(a):
    a = np.asarray(a)
    return a.item() if a.ndim == 0 else a
