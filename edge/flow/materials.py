"""Thermal expansion of the pipe and the primary element's bore. Pure.

ISO 5167-1:2003 takes D and d at the flowing conditions. They are measured at a reference
temperature (20 degC unless the config says otherwise) and corrected linearly, assuming pipe
and element at the fluid temperature:

    D = D_ref * (1 + lambda * (T - T_ref))

Mean linear expansion coefficients, 1/K: the table of linear coefficients of thermal
expansion in AGA Report No. 3, Part 2 (2000), quoted per degF there (6.20e-6, 9.25e-6,
7.95e-6 in/(in degF)) and converted here with x 1.8 (from memory of that table). They are
the common trade values for metering (common practice) and hold for moderate temperatures;
at steam temperatures (150-300 degC) the mean coefficient of carbon steel is a little
higher (about 12-13e-6 1/K), so a config may give its own coefficient (``"12.5e-6 1/K"``)
instead of a name.
"""

from __future__ import annotations

import math

__all__ = ["EXPANSION", "REFERENCE_TEMPERATURE", "at_temperature", "coefficient"]

REFERENCE_TEMPERATURE = 293.15  # K, 20 degC

# mean linear expansion coefficient, 1/K
EXPANSION: dict[str, float] = {
    "carbon_steel": 6.20e-6 * 1.8,  # 11.16e-6
    "stainless_304": 9.25e-6 * 1.8,  # 16.65e-6
    "stainless_316": 9.25e-6 * 1.8,  # 16.65e-6
    "monel_400": 7.95e-6 * 1.8,  # 14.31e-6
}


def at_temperature(
    length_ref: float, coefficient: float, t_k: float, t_ref: float = REFERENCE_TEMPERATURE
) -> float:
    """A diameter (m) measured at ``t_ref`` (K), at temperature ``t_k`` (K)."""
    return length_ref * (1.0 + coefficient * (t_k - t_ref))


def coefficient(text: str) -> float:
    """The expansion coefficient (1/K) of a material name in :data:`EXPANSION` or of a
    written coefficient (``"12.5e-6 1/K"``, ``"12.5e-6 /K"``); ValueError otherwise."""
    name = text.strip()
    if name in EXPANSION:
        return EXPANSION[name]
    number, _, unit = name.partition(" ")
    if unit.replace(" ", "") in ("1/K", "/K"):
        try:
            value = float(number)
        except ValueError:
            value = math.nan
        if math.isfinite(value) and 0.0 <= value < 1e-4:
            return value
        raise ValueError(f"{text!r}: a linear expansion coefficient lies between 0 and 1e-4 1/K")
    raise ValueError(
        f"unknown material {text!r}; give one of {', '.join(EXPANSION)} or a coefficient "
        "such as '12.5e-6 1/K'"
    )
