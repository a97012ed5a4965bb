"""Rules several parts of the program share, each written once. Pure.

- ``is_loopback``: whether a host names this machine, for every place that relaxes a
  check on loopback (plain-HTTP webhooks, an API without a token).
- ``channel_url_problem``: the notification channel URL policy (https anywhere, plain
  http only to this machine unless ``allow_plain_http``), for ``check`` and the channels.
- The barometer's bands, for ``check``, ``run`` (``edge.barometer``) and ``calc``: which
  altitudes and which absolute pressures can be a site's barometer at all, and the
  plausible band a live barometer reading must lie in, centred on the site's own
  standard-atmosphere pressure (so a site at 2600 m needs no settings).
"""

from __future__ import annotations

import ipaddress
from urllib.parse import urlsplit

__all__ = [
    "ALTITUDE_RANGE",
    "BAROMETRIC_RANGE",
    "SEA_LEVEL_BAND",
    "STANDARD_ATMOSPHERE",
    "altitude_problem",
    "barometer_problem",
    "channel_url_problem",
    "is_loopback",
    "plausible_band",
    "standard_atmosphere",
]

STANDARD_ATMOSPHERE = 101_325.0  # Pa, ICAO / ISO 2533 sea level
# m: from the Dead Sea shore to the highest settlements and mines, with room to spare;
# the troposphere formula below holds up to 11 km
ALTITUDE_RANGE = (-500.0, 8000.0)
# Pa absolute: weather at sea level stays within this band (record lows near 87 kPa in
# tropical cyclones, highs near 108.5 kPa; common practice). At another site the band is
# scaled by that site's standard-atmosphere pressure.
SEA_LEVEL_BAND = (80_000.0, 110_000.0)


def is_loopback(host: str | None) -> bool:
    """127.0.0.0/8, ::1 (bracketed or not) and ``localhost`` (a name that must resolve to
    loopback)."""
    if not host:
        return False
    if host.lower().rstrip(".") == "localhost":
        return True
    try:
        return ipaddress.ip_address(host.strip("[]")).is_loopback
    except ValueError:
        return False


def standard_atmosphere(altitude_m: float) -> float:
    """Pressure (Pa) at a geopotential altitude in the ICAO standard atmosphere (ISO 2533),
    troposphere: p = 101325 (1 - 2.25577e-5 h)^5.25588."""
    return STANDARD_ATMOSPHERE * (1.0 - 2.25577e-5 * altitude_m) ** 5.25588


def plausible_band(typical: float) -> tuple[float, float]:
    """(low, high) Pa a live barometer may read at a site whose typical pressure is
    ``typical`` Pa: ``SEA_LEVEL_BAND`` scaled by ``typical / 101325 Pa``."""
    scale = typical / STANDARD_ATMOSPHERE
    return SEA_LEVEL_BAND[0] * scale, SEA_LEVEL_BAND[1] * scale


# Pa absolute: anything outside cannot be a barometer anywhere (a unit slip, a gauge value)
BAROMETRIC_RANGE = (
    plausible_band(standard_atmosphere(ALTITUDE_RANGE[1]))[0],
    plausible_band(standard_atmosphere(ALTITUDE_RANGE[0]))[1],
)


def altitude_problem(altitude_m: float) -> str | None:
    """Why ``altitude_m`` cannot be a site's altitude, or None."""
    lo, hi = ALTITUDE_RANGE
    if lo <= altitude_m <= hi:
        return None
    return f"{altitude_m:g} m is outside {lo:g} m .. {hi:g} m"


def barometer_problem(pascals: float) -> str | None:
    """Why ``pascals`` (absolute) cannot be a barometric pressure, or None."""
    lo, hi = BAROMETRIC_RANGE
    if lo <= pascals <= hi:
        return None
    return (
        f"{pascals / 1e3:.4g} kPa is no barometric pressure (about 101 kPa at sea level, "
        f"54 kPa at 5000 m; {lo / 1e3:.0f} .. {hi / 1e3:.0f} kPa accepted); check the unit"
    )


def channel_url_problem(url: str, allow_plain_http: bool) -> str | None:
    """Why ``url`` cannot be a notification channel's URL, or None: it must be http(s)
    with a host; plain http only to this machine unless the channel allows it."""
    try:
        parts = urlsplit(url)
        parts.port  # noqa: B018 - raises ValueError on a bad port
    except ValueError as exc:
        return f"not a URL ({exc}): {url!r}"
    if parts.scheme not in ("http", "https") or not parts.hostname:
        return f"expected an http:// or https:// URL with a host, got {url!r}"
    if parts.scheme == "http" and not allow_plain_http and not is_loopback(parts.hostname):
        return (
            f"plain http to {parts.hostname} would send alarms unencrypted; use https, or "
            "set allow_plain_http: true on this channel"
        )
    return None
