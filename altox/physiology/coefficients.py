"""The model coefficient table (``altox/data/models.yaml``): every fitted or published
coefficient of the physiology, each with its value, unit and source, loaded once."""

from __future__ import annotations

def model_coefficients() -> dict:
    """The model coefficient table, loaded once from ``altox/data/models.yaml``."""
    from altox.yamlload import load_data_file

    return load_data_file("models")
