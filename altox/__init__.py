"""altox: how hypoxic each leg of an ascent itinerary or flight profile will be, checked against published guidance.

The public API is imported lazily so that the command line starts at once.
Every threshold altox applies is guidance only: the aviation authority's rules, the
operator's procedures, local codes and licensed aviation or expedition medicine decide.
"""

from __future__ import annotations

__version__ = "0.1.0"

_API = {
    "barometric_pressure": "altox.physiology.atmosphere",
    "altitude_for_pressure": "altox.physiology.atmosphere",
    "inspired_po2": "altox.physiology.gas_exchange",
    "alveolar_po2": "altox.physiology.gas_exchange",
    "arterial_po2": "altox.physiology.gas_exchange",
    "water_vapour_pressure": "altox.physiology.gas_exchange",
    "equivalent_altitude": "altox.physiology.gas_exchange",
    "saturation": "altox.physiology.blood",
    "po2_for_saturation": "altox.physiology.blood",
    "oxygen_content": "altox.physiology.blood",
    "ph_from_bicarbonate": "altox.physiology.blood",
    "assess": "altox.physiology.chain",
    "AltoxError": "altox.errors",
    "ProfileError": "altox.errors",
    "OutOfRangeError": "altox.errors",
    "UnitError": "altox.errors",
}

__all__ = sorted(_API) + ["__version__"]


def __getattr__(name):
    if name in _API:
        import importlib

        value = getattr(importlib.import_module(_API[name]), name)
        globals()[name] = value
        return value
    raise AttributeError(f"module 'altox' has no attribute {name!r}")


def __dir__():
    return __all__
