"""Configuration, version 1: YAML -> validated, typed, frozen model.

Every quantity is a string with its unit (parsed by ``units``); every error names its path
in the file and its line. Unknown keys are errors. ``load_config`` / ``parse_config`` (in ``load``)
are the way in: YAML with line numbers (``yaml_lines``), this schema, then the checks
across the whole file (``checks``); every problem found is reported, not just the first.

Relative file names in the file (certificates, ``*_file`` secrets, the storage path) are
taken relative to the folder of the config file. Secrets are read only when
``edge.config.secrets.read_secret`` is called, never at import or load time.
"""

from __future__ import annotations

from typing import Annotated, Any, Literal

from pydantic import (
    Field,
    model_validator,
)

from edge import units
from edge.config.flows import Flow
from edge.config.signals import (
    Signal,
    parse_difference,
    parse_level,
    parse_listen,
    parse_suppress,
    resolve_signal,
    tag_kind,
)
from edge.errors import UnitError

__all__ = [
    "PROTOCOLS",
    "Config",
    "Signal",
    "parse_difference",
    "parse_level",
    "parse_listen",
    "parse_suppress",
    "signal_of",
    "tag_kind",
]

from edge.config.fields import (
    Duration,
    Length,
    Limit,
    Model,
    Pressure,
    Priority,
    Reference,
    Size,
    TemperatureDifference,
)


class Barometer(Model):
    fixed: Pressure | None = None  # absolute
    altitude: Length | None = None  # standard atmosphere
    tag: str | None = None  # live reading, absolute
    max_age: Duration = 60.0
    plausible: tuple[Pressure, Pressure] | None = None  # default 80-110 kPa


class Tag(Model):
    name: str
    unit: str  # engineering unit of the value after scaling ("bar", "degC", "K", ...)
    reference: Reference | None = None  # required when the unit is a pressure unit
    scale: tuple[float, float, float, float] | None = None  # raw lo, raw hi, eng lo, eng hi
    signal: Literal["4-20mA"] | None = None  # NE 43 check; scale maps raw at 4 and 20 mA
    valid_range: tuple[float, float] | None = None  # engineering units; outside -> bad
    stale_after: Duration | None = None  # default: 3 source intervals

    @model_validator(mode="before")
    @classmethod
    def _reference_from_unit(cls, data: Any) -> Any:
        """A unit written with its reference (``barg``, ``psia``, ``inHg vac``) declares it."""
        if isinstance(data, dict) and data.get("reference") is None:
            try:
                info = units.unit_info(data["unit"])
            except (UnitError, KeyError, TypeError, AttributeError):
                return data
            if info.kind == "pressure" and info.reference is not None:
                return {**data, "reference": info.reference}
        return data


class ModbusTag(Tag):
    table: Literal["holding", "input"]
    address: int = Field(ge=0, le=65535)
    type: Literal["int16", "uint16", "int32", "uint32", "float32", "float64"] = "uint16"
    word_order: Literal["big", "little"] = "big"
    byte_swap: bool = False  # swap the two bytes inside each register
    unit_id: int | None = Field(default=None, ge=0, le=255)  # overrides the source's


class OpcUaTag(Tag):
    node: str  # NodeId string, e.g. "ns=2;s=HP.Pressure"


class SourceBase(Model):
    name: str
    interval: Duration = 1.0
    timeout: Duration = 1.0
    retries: int = Field(default=1, ge=0, le=10)
    backoff_max: Duration = 30.0  # cap of the reconnect backoff
    quality_delay: Duration = 10.0  # built-in <source>-comm alarm after the link is down this long


class ModbusTcpSource(SourceBase):
    protocol: Literal["modbus-tcp"]
    host: str
    port: int = Field(default=502, ge=1, le=65535)
    unit_id: int = Field(default=1, ge=0, le=255)
    max_gap: int = Field(default=8, ge=0, le=124)
    tags: list[ModbusTag]


class ModbusRtuSource(SourceBase):
    protocol: Literal["modbus-rtu"]
    device: str  # /dev/ttyUSB0, or a pty in tests
    baudrate: int = 9600
    parity: Literal["N", "E", "O"] = "N"
    stopbits: Literal[1, 2] = 1
    bytesize: Literal[7, 8] = 8
    unit_id: int = Field(default=1, ge=0, le=255)
    max_gap: int = Field(default=8, ge=0, le=124)
    tags: list[ModbusTag]


class OpcUaSecurity(Model):
    policy: Literal["None", "Basic256Sha256", "Aes128_Sha256_RsaOaep", "Aes256_Sha256_RsaPss"] = (
        "None"
    )
    mode: Literal["None", "Sign", "SignAndEncrypt"] = "None"
    certificate: str | None = None  # client certificate (DER or PEM file)
    private_key: str | None = None  # client private key (PEM file)
    server_certificate: str | None = None  # pinned server certificate
    trust_dir: str | None = None  # or: a folder of trusted server certificates


class OpcUaSource(SourceBase):
    protocol: Literal["opcua"]
    endpoint: str
    mode: Literal["subscribe", "poll"] = "subscribe"
    security: OpcUaSecurity = OpcUaSecurity()
    application_uri: str | None = None
    username: str | None = None
    password_env: str | None = None
    password_file: str | None = None
    watchdog: Duration = 2.0  # keep-alive period; a hung server is noticed within ~2x
    tags: list[OpcUaTag]


Source = Annotated[ModbusTcpSource | ModbusRtuSource | OpcUaSource, Field(discriminator="protocol")]
SOURCE_MODELS: dict[str, type[SourceBase]] = {
    "modbus-tcp": ModbusTcpSource,
    "modbus-rtu": ModbusRtuSource,
    "opcua": OpcUaSource,
}
PROTOCOLS: tuple[str, ...] = tuple(SOURCE_MODELS)


class DeviationAlarmSpec(Model):
    priority: Priority = "medium"
    on_delay: Duration = 60.0
    shelvable: bool = True  # False: operators may not shelve it (alarm philosophy)


class Point(Model):
    name: str
    pressure: str  # tag name
    temperature: str | None = None  # tag name
    state: Literal["saturated", "superheated", "subcooled"]
    tolerance: TemperatureDifference = 2.0  # saturated points: allowed |T - Tsat|
    band: TemperatureDifference | None = None  # |T - Tsat| judged as saturation; default tolerance
    quality_delay: Duration = 10.0  # built-in quality alarm after bad data this long
    deviation_alarm: DeviationAlarmSpec | None = None  # saturated points only


class DeviationLimit(Model):
    signal: str
    limit: Limit  # quantity with unit, kind follows the signal


class RateLimit(Model):
    limit: Limit  # change per minute, quantity with unit
    direction: Literal["rising", "falling", "either"] = "either"


class Alarm(Model):
    name: str
    signal: str  # <point>.<quantity> or a tag name
    # exactly one condition:
    high: Limit | None = None
    high_high: Limit | None = None
    low: Limit | None = None
    low_low: Limit | None = None
    deviation: DeviationLimit | None = None
    rate: RateLimit | None = None
    deadband: Limit | None = None  # same kind as the limit (a difference for temperatures)
    on_delay: Duration = 0.0
    off_delay: Duration = 0.0
    priority: Priority = "medium"
    latch: bool = False
    realarm: Duration | None = None  # re-announce if still active and unacknowledged
    suppress_when: str | None = None  # "<signal> < <quantity>" or ">"
    message: str = ""
    shelvable: bool = True  # False: operators may not shelve it (alarm philosophy)


class AlarmPhilosophy(Model):
    """Site rules for operator actions (ISA-18.2 / IEC 62682: the alarm philosophy says who
    may shelve what, and for how long)."""

    shelvable_priorities: list[Priority] = ["high", "medium", "low"]
    max_shelve: Duration = 8 * 3600.0  # also ends a one-shot shelve that never clears
    not_shelvable: list[str] = []  # alarm names (built-ins too)


class Channel(Model):
    name: str
    webhook: str | None = None
    alertmanager: str | None = None
    secret_env: str | None = None
    secret_file: str | None = None
    min_priority: Priority = "low"
    allow_plain_http: bool = False
    timeout: Duration = 10.0
    group_window: Duration = 5.0  # a burst inside this window goes as one message
    backoff_max: Duration = 300.0


class Http(Model):
    listen: str = "127.0.0.1:9847"
    token_env: str | None = None
    token_file: str | None = None
    max_body: int = Field(default=65536, ge=1024, le=16 * 1024 * 1024)  # bytes


class History(Model):
    """The embedded history of process values (``edge.history``), in its own SQLite file
    beside the state file unless ``path`` names one."""

    enabled: bool = True
    path: str | None = None  # default: <state file stem>.history.sqlite in its folder
    full_rate: Duration = 6 * 3600.0  # every evaluation pass kept this long
    minute_keep: Duration = 7 * 86400.0  # 1-minute min/mean/max kept this long
    retention: Duration = 30 * 86400.0  # 10-minute min/mean/max kept this long
    max_size: Size = 1_500_000_000  # bytes in use; the oldest data goes first beyond it


class Storage(Model):
    path: str = "/var/lib/steam-edge/state.sqlite"
    retention: Duration = 90 * 86400.0
    max_events: int = Field(default=1_000_000, ge=1000)
    history: History = History()


# publish[] lives in its own module, which builds on the models above
from edge.config.publish import Publish, PublishDeadband  # noqa: E402, F401


class Config(Model):
    version: Literal[1]
    site: str
    mode: Literal["advisory"] = "advisory"
    barometer: Barometer
    sources: list[Source]
    points: list[Point] = []
    alarms: list[Alarm] = []
    alarm_philosophy: AlarmPhilosophy = AlarmPhilosophy()
    notify: list[Channel] = []
    publish: list[Publish] = []
    http: Http = Http()
    storage: Storage = Storage()
    flows: list[Flow] = []

    def tags(self) -> dict[str, Tag]:
        """Every tag of every source, by name."""
        return {t.name: t for s in self.sources for t in s.tags}


# --- helpers for the rest of the program -----------------------------------------------------


def signal_of(config: Config, text: str) -> Signal:
    """Resolve an alarm signal (``"drum.pressure"`` or a tag name) against a loaded config."""
    return resolve_signal(text, config.tags(), {p.name: p for p in config.points})
