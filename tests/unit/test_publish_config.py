"""publish[] in the config: defaults, units of the deadbands, and the checks' one-line
errors with file, line and path."""

from __future__ import annotations

import pytest

from edge.config import parse_config
from edge.errors import ConfigError

BASE = """\
version: 1
site: riverside-laundry
barometer: {altitude: 120 m}
sources:
  - name: plc
    protocol: modbus-tcp
    host: 127.0.0.1
    tags:
      - {name: p1, table: holding, address: 0, type: float32, unit: bar, reference: gauge}
points:
  - {name: drum, pressure: p1, state: saturated}
publish:
"""


def problems(entry: str) -> list[str]:
    with pytest.raises(ConfigError) as info:
        parse_config(BASE + entry, "edge.yaml")
    return [str(p) for p in info.value.problems]


def test_defaults():
    """A bare channel: json, QoS unset (1 when sent), 1 kPa / 0.2 K deadbands, 60 s silence."""
    cfg = parse_config(BASE + "  - {name: fleet, mqtt: 'mqtt://127.0.0.1'}\n").publish[0]
    assert (cfg.format, cfg.qos, cfg.max_silence) == ("json", None, 60.0)
    assert (cfg.deadband.pressure, cfg.deadband.temperature) == (1000.0, 0.2)


def test_deadband_units_are_converted():
    """'0.05 bar' is 5000 Pa; '0.9 delta degF' is 0.5 K (1 degF = 5/9 K, from memory)."""
    entry = (
        "  - {name: fleet, mqtt: 'mqtt://127.0.0.1',"
        " deadband: {pressure: 0.05 bar, temperature: 0.9 delta degF}}\n"
    )
    cfg = parse_config(BASE + entry).publish[0]
    assert cfg.deadband.pressure == pytest.approx(5000.0)
    assert cfg.deadband.temperature == pytest.approx(0.5)


def test_gauge_deadband_is_refused():
    """A deadband is a difference: '0.05 barg' is an error on its line."""
    entry = "  - {name: fleet, mqtt: 'mqtt://127.0.0.1', deadband: {pressure: 0.05 barg}}\n"
    (p,) = problems(entry)
    assert p.startswith("edge.yaml:13: publish[0].deadband.pressure:") and "difference" in p


def test_plain_mqtt_to_another_machine_is_refused():
    """mqtt:// to a remote broker without allow_plain: one line naming mqtts://."""
    (p,) = problems("  - {name: fleet, mqtt: 'mqtt://broker.example.invalid'}\n")
    assert "publish[0].mqtt" in p and "mqtts://" in p


def test_not_an_mqtt_url():
    """An http:// URL is refused naming the two schemes."""
    (p,) = problems("  - {name: fleet, mqtt: 'http://127.0.0.1'}\n")
    assert "expected an mqtt:// or mqtts:// URL" in p


def test_sparkplug_refuses_qos_1():
    """Sparkplug 3.0 sends births and data at QoS 0: qos 1 is an error there."""
    entry = "  - {name: fleet, mqtt: 'mqtt://127.0.0.1', format: sparkplug-b, qos: 1}\n"
    (p,) = problems(entry)
    assert "publish[0].qos" in p and "QoS 0" in p


def test_per_point_deadband_names_a_point():
    """A per-point deadband for an unknown point is an error naming it."""
    entry = "  - {name: fleet, mqtt: 'mqtt://127.0.0.1', points: {boiler: {pressure: 1 kPa}}}\n"
    (p,) = problems(entry)
    assert "publish[0].points.boiler" in p and "no point named 'boiler'" in p


def test_password_needs_a_username():
    """password_env without username is an error."""
    (p,) = problems("  - {name: fleet, mqtt: 'mqtt://127.0.0.1', password_env: MQTT_PW}\n")
    assert "publish[0].username" in p


def test_check_summarises_the_channels(capsys):
    """steam-edge check lists each channel: format, broker, topics, login and deadbands."""
    from pathlib import Path

    from edge.cli import main

    code = main(["check", "-c", str(Path(__file__).resolve().parents[2] / "config/example.yaml")])
    out = capsys.readouterr().out
    assert code == 0
    assert "  fleet: json to mqtts://mqtt.example.invalid:8883, topics steam-edge/" in out
    assert "deadband 0.05 bar / 0.5 K, heartbeat 1 min" in out
    assert "  plant-host: sparkplug-b to mqtt://192.168.10.5:1883, spBv1.0/dairy-sites/" in out


def _demo_args(**over):
    import argparse

    from edge.commands import demo

    parser = argparse.ArgumentParser()
    demo.add_arguments(parser)
    ns = parser.parse_args([])
    for k, v in over.items():
        setattr(ns, k, v)
    return ns


def test_demo_publish_adds_a_channel_that_passes_the_check(tmp_path, monkeypatch):
    """demo --publish URL --publish-user NAME: the per-run config has a json channel to that
    broker with the password from STEAMEDGE_MQTT_PASSWORD, and loads."""
    from edge.commands import demo
    from edge.config import load_config

    monkeypatch.setenv("STEAMEDGE_MQTT_PASSWORD", "demo-secret")
    run = demo.prepare(
        _demo_args(listen="127.0.0.1:0", publish="mqtt://127.0.0.1:1883", publish_user="watch"),
        tmp_path,
    )
    (ch,) = load_config(str(run.config_path)).publish
    assert (ch.mqtt, ch.format, ch.username) == ("mqtt://127.0.0.1:1883", "json", "watch")
    assert (
        ch.password_env == "STEAMEDGE_MQTT_PASSWORD"
        and "demo-secret" not in run.config_path.read_text()
    )
    assert run.publish == [
        "mqtt://127.0.0.1:1883 (json); watch with a subscriber on "
        "steam-edge/kestrel-mill-dyeworks/#"
    ]


def test_demo_publish_sparkplug(tmp_path):
    """--publish-format sparkplug-b makes a Sparkplug channel and says where to look."""
    from edge.commands import demo
    from edge.config import load_config

    run = demo.prepare(
        _demo_args(
            listen="127.0.0.1:0", publish="mqtt://127.0.0.1:1883", publish_format="sparkplug-b"
        ),
        tmp_path,
    )
    (ch,) = load_config(str(run.config_path)).publish
    assert ch.format == "sparkplug-b" and ch.username is None
    assert "spBv1.0/#" in run.publish[0]
