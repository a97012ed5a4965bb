"""``publish[]``: outbound MQTT channels (models and their checks).

.. code-block:: yaml

    publish:
      - name: fleet
        mqtt: mqtts://broker.example.invalid:8883   # mqtt:// (1883) or mqtts:// (8883)
        ca: fleet-ca.pem                 # pinned CA: only a server it issued is trusted
        certificate: edge.pem            # optional client certificate and key
        private_key: edge.key
        username: riverside
        password_env: STEAMEDGE_MQTT_PASSWORD
        format: json                     # json | sparkplug-b
        topic: steam-edge/riverside-laundry   # json; default steam-edge/<site>
        qos: 1                           # json: 0, 1 (default) or 2
        deadband: {pressure: 0.05 bar, temperature: 0.5 K}
        points: {drum: {pressure: 0.02 bar}}  # per-point deadbands
        max_silence: 60 s
"""

from __future__ import annotations

from typing import Annotated, Any, Literal
from urllib.parse import urlsplit

from pydantic import BeforeValidator, Field, ValidationInfo

from edge import units
from edge.config.fields import Duration, Model, TemperatureDifference
from edge.config.rules import is_loopback
from edge.config.yaml_lines import Path

__all__ = [
    "DEFAULT_GROUP",
    "Publish",
    "PublishDeadband",
    "broker_address",
    "check_publish",
    "default_topic",
]

DEFAULT_GROUP = "steam-edge"
PORTS = {"mqtt": 1883, "mqtts": 8883}  # IANA registered ports for MQTT and MQTT over TLS


def _pressure_difference(v: Any, info: ValidationInfo) -> Any:
    if isinstance(v, float) and not (info.context or {}).get("from_file"):
        return v
    if isinstance(v, bool) or not isinstance(v, str):
        raise ValueError(f"expected a pressure difference with a unit, e.g. '0.05 bar', got {v!r}")
    q = units.parse_pressure(v)
    if q.reference is not None:
        raise ValueError(f"a deadband is a difference: write '{v}' without g/a/vac ('0.05 bar')")
    return q.value


PressureDifference = Annotated[float, BeforeValidator(_pressure_difference)]  # Pa


def _version(v: Any) -> Any:
    return str(v) if isinstance(v, int) and not isinstance(v, bool) else v  # protocol: 5


MqttVersion = Annotated[Literal["3.1.1", "5"], BeforeValidator(_version)]


class PublishDeadband(Model):
    pressure: PressureDifference = 1000.0  # Pa (0.01 bar)
    temperature: TemperatureDifference = 0.2  # K, on the measured temperature


class PointDeadband(Model):
    pressure: PressureDifference | None = None
    temperature: TemperatureDifference | None = None


class Publish(Model):
    name: str
    mqtt: str
    protocol: MqttVersion = "3.1.1"
    format: Literal["json", "sparkplug-b"] = "json"
    ca: str | None = None  # PEM file of the CA to pin (mqtts)
    certificate: str | None = None  # client certificate (PEM)
    private_key: str | None = None  # its key (PEM)
    username: str | None = None
    password_env: str | None = None
    password_file: str | None = None
    allow_plain: bool = False  # plain mqtt:// to another machine
    topic: str | None = None  # json: topic prefix, default steam-edge/<site>
    group: str = DEFAULT_GROUP  # sparkplug-b: group_id
    node: str | None = None  # sparkplug-b: edge_node_id, default the site
    primary_host: str | None = None  # sparkplug-b: wait for this host's STATE online
    client_id: str | None = None  # default steam-edge-<site>-<name>
    qos: Literal[0, 1, 2] | None = None  # json: default 1; sparkplug-b: fixed by the spec
    deadband: PublishDeadband = PublishDeadband()
    points: dict[str, PointDeadband] = Field(default_factory=dict)
    max_silence: Duration = 60.0
    queue_max: int = Field(default=100_000, ge=100, le=10_000_000)
    keepalive: Duration = 30.0
    timeout: Duration = 10.0
    backoff_max: Duration = 60.0


def default_topic(site: str) -> str:
    return f"steam-edge/{site}"


def broker_address(url: str) -> tuple[str, str, int]:
    """(scheme, host, port) of an ``mqtt://`` or ``mqtts://`` URL; ValueError if it is not one."""
    parts = urlsplit(url)
    port = parts.port  # raises ValueError on a bad port
    if parts.scheme not in PORTS or not parts.hostname:
        raise ValueError(f"expected an mqtt:// or mqtts:// URL with a host, got {url!r}")
    if parts.path not in ("", "/") or parts.query or parts.username or parts.password:
        raise ValueError(
            f"give only scheme, host and port in {url!r} (user and password have their own keys)"
        )
    return parts.scheme, parts.hostname, port or PORTS[parts.scheme]


def check_publish(
    p: Path, ch: Publish, site: str | None, points: set[str], out: list[tuple[Path, str]]
) -> None:
    """Cross-field checks of one channel."""
    from edge.config.secrets import check_secret
    from edge.publish.json_format import valid_prefix
    from edge.publish.sparkplug import valid_id

    try:
        scheme, host, _ = broker_address(ch.mqtt)
    except ValueError as exc:
        out.append(((*p, "mqtt"), str(exc)))
        scheme, host = "", ""
    if scheme == "mqtt":
        if ch.ca or ch.certificate:
            out.append(((*p, "ca" if ch.ca else "certificate"), "certificates need mqtts://"))
        if host and not ch.allow_plain and not is_loopback(host):
            out.append(
                (
                    (*p, "mqtt"),
                    "plain mqtt:// to another machine sends plant data and the password "
                    "unencrypted; use mqtts://, or set allow_plain: true",
                )
            )
    if (ch.certificate is None) != (ch.private_key is None):
        out.append(((*p, "private_key"), "a client certificate needs both certificate and key"))
    if (ch.password_env or ch.password_file) and not ch.username:
        out.append(((*p, "username"), "a password needs a username"))
    check_secret(p, ch, "password", out)
    if ch.format == "json":
        for key in ("node", "primary_host"):
            if getattr(ch, key) is not None:
                out.append(((*p, key), "only for format sparkplug-b"))
        if ch.topic is not None and not valid_prefix(ch.topic):
            out.append(
                (
                    (*p, "topic"),
                    f"{ch.topic!r} is not a topic prefix (no '+', '#', empty level or leading $)",
                )
            )
    else:
        if ch.topic is not None:
            out.append(((*p, "topic"), "sparkplug-b topics are spBv1.0/<group>/...: use group"))
        if ch.qos not in (None, 0):
            out.append(
                (
                    (*p, "qos"),
                    "Sparkplug 3.0 fixes QoS 0 for births and data (the death is QoS 1)",
                )
            )
        ids = [("group", ch.group), ("node", ch.node or site or "")]
        ids += [("primary_host", ch.primary_host)] if ch.primary_host is not None else []
        for key, value in ids:
            if not valid_id(value):
                out.append(((*p, key), f"{value!r} cannot be a Sparkplug id (no '/', '+', '#')"))
    for name in sorted(points):
        if not valid_id(name):
            out.append(((*p, "mqtt"), f"point {name!r} cannot be a topic level (no '/', '+', '#')"))
    for name in ch.points:
        if name not in points:
            out.append(((*p, "points", name), f"no point named {name!r}"))
    for key in ("max_silence", "keepalive", "timeout", "backoff_max"):
        if getattr(ch, key) <= 0:
            out.append(((*p, key), "must be longer than 0 s"))
    if ch.deadband.pressure < 0 or ch.deadband.temperature < 0:
        out.append(((*p, "deadband"), "a deadband cannot be negative"))
