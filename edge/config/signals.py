"""Alarm signals and the quantities written against them. Pure; shared by the config
checks and the alarm engine so both read a limit the same way.

A signal is ``<point>.<quantity>`` (quantity from ``edge.model.POINT_QUANTITIES``) or a tag
name. Its *kind* decides which units a limit may use:

========================  ===================  ==============================
signal                    level (high, low)    difference (deadband, deviation)
========================  ===================  ==============================
point.pressure            absolute pressure    pressure without a reference
pressure tag              the tag's reference  pressure without a reference
temperature, tsat         temperature          K or delta degF
superheat, deviation      K or delta degF      K or delta degF
enthalpy                  J/kg, kJ/kg, MJ/kg,  same
                          Btu/lb
entropy                   J/(kg K), kJ/(kg K), same
                          Btu/(lb R)
density                   kg/m3, g/cm3, lb/ft3 same
========================  ===================  ==============================

A pressure level must name its reference (``8 bara``, ``7 barg``, ``25 inHg vac``): a bare
``7 bar`` would be the gauge/absolute guess the project refuses to make. When it differs
from the signal's reference the alarm engine converts with the live barometer. Differences
are never negative. A rate limit is a difference per minute (``rate: {limit: 1 bar}``).
Limits are parsed by ``edge.config.quantities``, the same functions the alarm definitions
use; units come from ``edge.units``.
"""

from __future__ import annotations

import difflib
import re
from collections.abc import Iterable, Mapping
from dataclasses import dataclass
from typing import Any

from edge import units
from edge.config import quantities
from edge.config.quantities import POINT_KINDS, quantity_text
from edge.model import POINT_QUANTITIES

__all__ = [
    "Signal",
    "parse_difference",
    "parse_level",
    "parse_listen",
    "parse_suppress",
    "resolve_signal",
    "suggest",
    "tag_kind",
]

_NEEDS_TEMPERATURE = {"temperature", "superheat", "deviation", "enthalpy", "entropy", "density"}


def suggest(name: str, candidates: Iterable[str]) -> str:
    """`` (did you mean 'x'?)`` for the closest candidate, or an empty string."""
    close = difflib.get_close_matches(name, list(candidates), n=1, cutoff=0.6)
    return f" (did you mean '{close[0]}'?)" if close else ""


@dataclass(frozen=True, slots=True)
class Signal:
    """What an alarm watches, and how its values and limits are measured."""

    text: str
    kind: str  # pressure | temperature | tdiff | enthalpy | entropy | density | time | length
    reference: str | None = None  # pressures: the reference of the values (point: absolute)
    tag: str | None = None
    point: str | None = None
    quantity: str | None = None


def tag_kind(tag: Any) -> str:
    """``"pressure"``, ``"temperature"``, ``"tdiff"``, ``"time"`` or ``"length"`` for a
    tag's unit. Raises UnitError for a unit units.py does not know."""
    return units.unit_info(tag.unit).kind


def resolve_signal(text: str, tags: Mapping[str, Any], points: Mapping[str, Any]) -> Signal:
    """Look a signal up among the tags and points. Raises ValueError with a readable reason."""
    if not isinstance(text, str) or not text.strip():
        raise ValueError("a signal is '<point>.<quantity>' or a tag name")
    point_name, dot, quantity = text.rpartition(".")
    as_point = bool(dot) and point_name in points
    if text in tags:
        if as_point:
            raise ValueError(f"'{text}' is both a tag and a point quantity; rename the tag")
        tag = tags[text]
        return Signal(text, tag_kind(tag), tag.reference, tag=text)
    if not as_point:
        if dot and point_name and quantity in POINT_QUANTITIES:
            raise ValueError(
                f"no point named '{point_name}' and no tag named '{text}'"
                + suggest(point_name, points)
            )
        raise ValueError(
            f"no tag named '{text}' and no '<point>.<quantity>' of that name"
            + suggest(text, [*tags, *(f"{p}.{q}" for p in points for q in POINT_QUANTITIES)])
        )
    if quantity not in POINT_QUANTITIES:
        raise ValueError(
            f"'{quantity}' is not a point quantity{suggest(quantity, POINT_QUANTITIES)}; "
            f"accepted: {', '.join(POINT_QUANTITIES)}"
        )
    point = points[point_name]
    if quantity in _NEEDS_TEMPERATURE and point.temperature is None:
        raise ValueError(f"point '{point_name}' has no temperature tag, so it has no {quantity}")
    if quantity == "deviation" and point.state != "saturated":
        raise ValueError(
            f"deviation is defined on saturated points only; '{point_name}' is {point.state}"
        )
    kind, reference = POINT_KINDS[quantity]
    return Signal(text, kind, reference, point=point_name, quantity=quantity)


def parse_level(text: str, signal: Signal) -> float:
    """A level (high/low limit, suppress threshold) for ``signal`` in SI; a pressure in the
    reference it is written in (which it must name). Raises UnitError with the accepted units."""
    reads = f"{signal.text} reads {signal.reference or 'an unknown'} pressure"
    return quantities.parse_level(text, signal.kind, reads=reads).value


def parse_difference(text: str, signal: Signal) -> float:
    """A difference (deadband, deviation limit, rate per minute) for ``signal``, in SI."""
    return quantities.parse_difference(text, signal.kind).value


_SUPPRESS = re.compile(r"^\s*(\S+?)\s*([<>])\s*(\S.*?)\s*$")


def parse_suppress(text: str) -> tuple[str, str, str]:
    """``"boiler.pressure < 1.5 bara"`` -> ``("boiler.pressure", "<", "1.5 bara")``."""
    m = _SUPPRESS.match(quantity_text(text))
    if not m:
        raise ValueError(
            f"expected '<signal> < <quantity>' or '<signal> > <quantity>', got {text!r}"
        )
    return m.group(1), m.group(2), m.group(3)


def parse_listen(text: str) -> tuple[str, int]:
    """``"127.0.0.1:9847"`` or ``"[::1]:9847"`` -> ``(host, port)``; port 0 picks a free one."""
    if not isinstance(text, str):
        raise ValueError(f"expected 'host:port', got {text!r}")
    m = re.fullmatch(r"\s*(\[[0-9A-Fa-f:.]+\]|[^\s:\[\]]+):(\d{1,5})\s*", text)
    if not m:
        raise ValueError(f"expected 'host:port' such as '127.0.0.1:9847', got {text!r}")
    port = int(m.group(2))
    if port > 65535:
        raise ValueError(f"port {port} is outside 0..65535")
    return m.group(1).strip("[]"), port
