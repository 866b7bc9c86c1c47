"""Values with units in a case file (``glass_thickness = "1.2 mm"``, ``air_temperature = "24 degC"``,
``relative_humidity = "45 %"``), converted to the schema's SI unit by pint, and warnings on
proportions that are valid but implausible for the device (millimetres typed as metres).

pint is an optional dependency (the ``units`` extra): a well-kept units library that parses and
converts far more spellings, offsets (degC, degF) and prefixes than hand-written code would.
"""
from __future__ import annotations

import re
from functools import lru_cache

_NUMBER = re.compile(r"\s*([-+]?(?:\d+\.?\d*|\.\d+)(?:[eE][-+]?\d+)?)\s*(.*?)\s*")


@lru_cache(maxsize=1)
def _registry():
    import pint

    return pint.UnitRegistry(autoconvert_offset_to_baseunit=True)


def _pint_units(text: str) -> str:
    """The schema's unit spelling (``kg/m2``, ``W/(m K)``, ``deg``) in pint's (``kg/m**2``)."""
    text = re.sub(r"([A-Za-z])(\d)", r"\1**\2", text.strip())
    return {"": "dimensionless", "deg": "degree", "-": "dimensionless"}.get(text, text)


def to_schema_unit(value: str, unit: str) -> float:
    """``value`` (a number followed by a unit, e.g. ``"1.2 mm"``) in ``unit`` (the schema's).

    Raises
    ------
    ValueError
        With a message that says what was expected (no number, an unknown unit, a wrong dimension,
        pint not installed).
    """
    match = _NUMBER.fullmatch(value)
    if match is None:
        raise ValueError(f"expected a number with a unit such as '1.2 mm' or '24 degC' in {unit or 'no unit'}")
    magnitude, given = float(match.group(1)), match.group(2)
    if not given:  # a number in quotes is more likely a slip than a choice: say so
        raise ValueError(f"expected a number, or a value with its unit in quotes; write {magnitude:g} without "
                         f"quotes (in {unit or 'no unit'}) or add the unit, e.g. \"{magnitude:g} mm\"")
    try:
        registry = _registry()
    except ImportError:
        raise ValueError("values with units need pint: pip install 'fvsolver[units]' (or write the number in "
                         f"{unit or 'no unit'})") from None
    import pint

    try:
        quantity = registry.Quantity(magnitude, _pint_units(given))
        return float(quantity.to(_pint_units(unit)).magnitude)
    except pint.errors.DimensionalityError:
        raise ValueError(f"'{given}' is not a unit of the same kind as {unit or 'a plain number'}") from None
    except (pint.errors.UndefinedUnitError, pint.errors.DefinitionSyntaxError, AttributeError, TypeError):
        raise ValueError(f"unit '{given}' is not known; write e.g. '1.2 mm' or '24 degC' "
                         f"(the key's unit is {unit or 'none'})") from None


def implausible(data: dict) -> list[str]:
    """Warnings (not errors) on proportions a real head rarely has: each names the keys, the values
    and what is usual (common practice for hand-blown glass heads)."""
    g = data.get("geometry", {})
    out = []
    radius = g.get("bulb_inner_radius", g.get("inner_radius")) if g.get("shape") in (
        "device_head", "two_layer_shell") else None
    if radius is None:
        return out
    name = "bulb_inner_radius" if "bulb_inner_radius" in g else "inner_radius"
    glass, cap = g.get("glass_thickness"), g.get("cap_thickness")
    if glass is not None and glass > 0.25 * radius:
        out.append(f"geometry.glass_thickness = {glass:g} m is {glass / radius:.2g} times geometry.{name} = "
                   f"{radius:g} m; a glass wall is usually 2-10 % of the radius (millimetres typed as metres? "
                   "write \"1.2 mm\")")
    if cap is not None and cap > 0.5 * radius:
        out.append(f"geometry.cap_thickness = {cap:g} m is {cap / radius:.2g} times geometry.{name} = {radius:g} m;"
                   " a felt cap is usually a few millimetres (write \"2 mm\")")
    if not 0.003 <= radius <= 0.2:
        out.append(f"geometry.{name} = {radius:g} m is outside the 3 mm - 200 mm of blown-glass heads "
                   "(a unit slip? write e.g. \"19 mm\")")
    return out
