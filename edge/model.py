"""Plain data types shared by the core and the shell. No I/O, no clock."""

from __future__ import annotations

import math
from collections.abc import Mapping
from dataclasses import dataclass
from enum import IntEnum
from types import MappingProxyType
from typing import Literal, NamedTuple, get_args

# ISA-18.2 alarm priorities, most urgent first: the one definition (config, engine,
# outbox order, API, CLI and metrics take it from here).
Priority = Literal["critical", "high", "medium", "low"]
PRIORITIES: tuple[str, ...] = get_args(Priority)
# An alarm's condition keys: limits first (their deadband and delays are alike), then the
# two that compare over time or against another signal.
LIMIT_CONDITIONS: tuple[str, ...] = ("high_high", "high", "low", "low_low")
CONDITIONS: tuple[str, ...] = (*LIMIT_CONDITIONS, "deviation", "rate")


class Level(IntEnum):
    """Quality level; the numeric value is what ``steamedge_point_quality`` exports."""

    BAD = 0
    UNCERTAIN = 1
    GOOD = 2


# Reasons the project itself gives. OPC UA status-code names (e.g. "BadSensorFailure")
# and Modbus exception names are also used as reasons, so the set is open.
COMM_LOSS = "comm_loss"
STALE = "stale"
OUT_OF_RANGE = "out_of_range"
SENSOR_FAULT = "sensor_fault"
OUTSIDE_IF97 = "outside_if97"
CONFIG = "config"
NOT_A_NUMBER = "not_a_number"
NO_DATA = "no_data"


@dataclass(frozen=True, slots=True)
class Quality:
    level: Level
    reason: str | None = None

    @property
    def good(self) -> bool:
        return self.level is Level.GOOD

    @property
    def name(self) -> str:
        return _LEVEL_NAMES[self.level]

    def __str__(self) -> str:
        return f"{self.name}({self.reason})" if self.reason else self.name


_LEVEL_NAMES = tuple(level.name.lower() for level in Level)  # by value: 0 bad .. 2 good
GOOD = Quality(Level.GOOD)


def bad(reason: str) -> Quality:
    return Quality(Level.BAD, reason)


def uncertain(reason: str) -> Quality:
    return Quality(Level.UNCERTAIN, reason)


def worst(*qualities: Quality) -> Quality:
    """The worst of the given qualities (the first one of that level keeps its reason)."""
    result = GOOD
    for q in qualities:
        if q.level < result.level:
            result = q
    return result


class Sample(NamedTuple):
    """One reading of one tag, converted to SI inside the source.

    A pressure value is in pascal *in the tag's own reference* (gauge, absolute or vacuum);
    ``derive`` turns it into an absolute pressure with the barometer. Temperatures are kelvin.
    ``value`` is NaN when quality is bad; ``last_good`` carries the last good value as
    context only, never as a fresh reading.

    A named tuple, not a dataclass: 10,000 tags make 10,000 of these a second, and a tuple
    is built in C (0.16 us against 0.6 us for a frozen slots dataclass filled slot by slot).
    Immutable like one; compare samples with samples.
    """

    tag: str
    value: float
    quality: Quality
    source_time: float  # seconds since the epoch, from the PLC/server when it gives one
    receive_time: float  # seconds since the epoch, when the monitor received it
    last_good: float | None = None

    @property
    def usable(self) -> bool:
        return self.quality.level is not Level.BAD and math.isfinite(self.value)


class Reading(NamedTuple):
    """A value with its quality: what derive and the alarm engine pass around (a named
    tuple for the same reason as ``Sample``: derive makes four per point per pass)."""

    value: float | None
    quality: Quality
    unit: str = ""  # SI unit symbol for display: "Pa", "K", "J/kg", "kg/m3"

    @property
    def usable(self) -> bool:
        return (
            self.value is not None
            and math.isfinite(self.value)
            and self.quality.level is not Level.BAD
        )


def missing(reason: str, unit: str = "") -> Reading:
    return Reading(None, bad(reason), unit)


@dataclass(frozen=True, slots=True)
class BarometerReading:
    value: float  # Pa, absolute
    origin: str  # "fixed" | "altitude" | "tag"
    quality: Quality = GOOD


NO_EXTRA: Mapping[str, float] = MappingProxyType({})

POINT_QUANTITIES = (
    "pressure",  # absolute, Pa
    "temperature",  # K
    "tsat",  # K
    "superheat",  # K (temperature - tsat; negative = subcooled)
    "deviation",  # K, |superheat| on a saturated point
    "enthalpy",  # J/kg
    "entropy",  # J/(kg K)
    "density",  # kg/m3
)


# Measured phase of a point (``PointState.phase``), judged from (p, T) beside the configured
# ``state``: outside the point's band around Tsat the fluid is superheated or subcooled;
# inside it, ``saturated`` on a point configured saturated, ``near_saturation`` on the
# others; above the critical pressure there is no saturation line (``supercritical``).
SUPERHEATED = "superheated"
SUBCOOLED = "subcooled"
SATURATED = "saturated"
NEAR_SATURATION = "near_saturation"
SUPERCRITICAL = "supercritical"
PHASES = (SUPERHEATED, SUBCOOLED, SATURATED, NEAR_SATURATION, SUPERCRITICAL)


@dataclass(frozen=True, slots=True)
class Fix:
    """One configuration change: ``setting`` is written as the tag's own entry takes it
    (``unit: barg`` on a tag whose unit carries its reference, ``unit: bar, reference:
    gauge`` on one with a separate ``reference``), so the changed config passes ``check``."""

    tag: str
    setting: str

    def __str__(self) -> str:
        return f"{self.tag} {self.setting}"


@dataclass(frozen=True, slots=True)
class Hint:
    """A commissioning hint on a saturated point that disagrees with the steam tables.

    ``code`` says what kind: ``reference``, ``unit``, ``unit_reference`` (both at once),
    ``temperature_unit`` (a configuration change explains the data: ``fix``), ``either``
    (two or more changes fit equally: ``fix`` and every ``alternatives`` entry), or, with
    no ``fix``, ``undecided`` (a change fits, but so does a steady temperature offset or a
    coincidence; the evidence does not tell them apart yet) and ``unexplained`` (no
    configuration mistake explains it: a sensor or process matter). ``confidence`` is a
    0..1 score of how clearly the evidence singles out the fix (not a probability)."""

    code: str
    sentence: str
    fix: Fix | None = None
    alternatives: tuple[Fix, ...] = ()
    confidence: float = 0.0

    def __str__(self) -> str:
        return self.sentence

    @property
    def fixes(self) -> tuple[Fix, ...]:
        """Every change the hint names: ``fix`` first, then the alternatives."""
        return (self.fix, *self.alternatives) if self.fix is not None else self.alternatives

    @property
    def label(self) -> str:
        """A short bounded text for a metric label: the fix, or the code without one."""
        if self.fix is None:
            return self.code
        return self.fix.setting if self.code != "either" else "either"

    def to_dict(self) -> dict[str, object]:
        return {
            "code": self.code,
            "sentence": self.sentence,
            "fix": None if self.fix is None else {"tag": self.fix.tag, "set": self.fix.setting},
            "alternatives": [{"tag": f.tag, "set": f.setting} for f in self.alternatives],
            "confidence": self.confidence,
        }


class PointState(NamedTuple):
    """What derive computed for one point at one instant (a named tuple, built in C: one
    per point per pass). ``_replace`` gives a changed copy."""

    name: str
    state: str  # configured expectation: saturated | superheated | subcooled
    readings: Mapping[str, Reading]
    quality: Quality  # worst of the inputs and of the phase judgement
    hint: Hint | None = None  # commissioning hint (likely configuration mistake)
    extra: Mapping[str, float] = NO_EXTRA
    phase: str | None = None  # measured phase (PHASES), None when (p, T) is not known

    def get(self, quantity: str) -> Reading:  # type: ignore[override]
        return self.readings.get(quantity) or missing(CONFIG)

    @property
    def hint_text(self) -> str | None:
        """The hint as one plain sentence (what alarm messages and logs carry)."""
        return None if self.hint is None else str(self.hint)


@dataclass(frozen=True, slots=True)
class AlarmEvent:
    """One entry of the alarm journal. ``id`` is given by the journal when it is stored;
    ``key`` (site/id) is the idempotency key notifications carry."""

    alarm: str
    kind: str  # raised, cleared, acknowledged, returned, shelved, unshelved, shelve_expired,
    # suppressed, unsuppressed, out_of_service, in_service, realarm
    time: float  # seconds since the epoch
    priority: str  # critical | high | medium | low
    value: float | None = None  # SI
    limit: float | None = None  # SI
    quality: str = "good"
    user: str | None = None
    comment: str | None = None
    message: str = ""  # rendered in display units
    state: str = ""  # the alarm's ISA-18.2 state after this event
    id: int | None = None
    key: str | None = None
