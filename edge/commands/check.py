"""steam-edge check: validate a config file and print what it describes.

Exit 0 with a summary on stdout, or exit 2 with every problem on stderr, one per line
(``error: FILE:LINE: PATH: MESSAGE``). A user's mistake never gives a traceback.
"""

from __future__ import annotations

import argparse
import os
import sys
from pathlib import Path
from typing import Any, TextIO

from edge import units
from edge.config import Config, load_config, read_secret, security_warnings
from edge.config.yaml_lines import parse_path, read_yaml
from edge.errors import ConfigError, ConfigProblem
from edge.model import LIMIT_CONDITIONS

EXIT_OK = 0
EXIT_INVALID = 2


def add_arguments(parser: argparse.ArgumentParser) -> None:
    parser.add_argument(
        "-c", "--config", required=True, metavar="FILE", help="the YAML config file to check"
    )


def main(args: argparse.Namespace) -> int:
    try:
        config = load_config(args.config)
        builtins = compile_as_run(config, args.config)
    except ConfigError as exc:
        for problem in exc.problems:
            print(f"error: {problem}", file=sys.stderr)
        n = len(exc.problems)
        print(f"{n} problem{'s' if n != 1 else ''} in {args.config}", file=sys.stderr)
        return EXIT_INVALID
    print_summary(config, args.config, sys.stdout, builtins)
    for warning in [*security_warnings(config), *barometer_warnings(config)]:
        print(f"warning: {warning}", file=sys.stderr)
    return EXIT_OK


def barometer_warnings(config: Config) -> list[str]:
    """Vacuum points on a fixed or altitude barometer (``edge.derive.advice``); IF97 is
    loaded only when there is one."""
    if config.barometer is None or config.barometer.tag is not None:
        return []
    tags = config.tags()
    if not any(
        (t := tags.get(p.pressure)) is not None and t.reference == "vacuum" for p in config.points
    ):
        return []
    from edge.derive.advice import barometer_warnings as warnings_of

    return warnings_of(config)


def compile_as_run(config: Config, filename: str) -> int:
    """Compile the config with ``run``'s own ``compile_plan`` (so check passes exactly what
    run accepts, with the same words) and read every secret file present here by the
    service's rule. Returns the number of built-in alarms; problems get their lines."""
    from edge.evaluation import compile_plan

    problems: list[ConfigProblem] = []
    builtins = 0
    try:
        plan = compile_plan(config)
    except ConfigError as exc:
        problems += exc.problems
    else:
        builtins = sum(1 for d in plan.alarms.values() if d.builtin)
    problems += secret_problems(config)
    if problems:
        try:
            doc = read_yaml(Path(filename).read_text(encoding="utf-8-sig"), filename)
        except (OSError, UnicodeDecodeError, ConfigError):  # changed meanwhile: no lines
            doc = read_yaml("{}", filename)
        raise ConfigError([doc.problem(parse_path(p.path), p.message) for p in problems])
    return builtins


def secret_files(config: Config) -> list[tuple[str, str]]:
    """(config key, file name) of every ``*_file`` secret the config names."""
    out: list[tuple[str, str]] = []
    if config.http.token_file:
        out.append(("http.token", config.http.token_file))
    for i, src in enumerate(config.sources):
        if getattr(src, "password_file", None):
            out.append((f"sources[{i}].password", src.password_file))
    for i, ch in enumerate(config.notify):
        if ch.secret_file:
            out.append((f"notify[{i}].secret", ch.secret_file))
    for i, pub in enumerate(config.publish):
        if pub.password_file:
            out.append((f"publish[{i}].password", pub.password_file))
    return out


def secret_problems(config: Config) -> list[ConfigProblem]:
    """Every secret file that exists here but would be refused at start (empty, blank,
    too large, not UTF-8), by the one secret reader. A file missing here is not an error:
    it may live only where the service runs (the summary says so)."""
    problems: list[ConfigProblem] = []
    for key, file in secret_files(config):
        if not os.path.exists(file):
            continue
        try:
            read_secret(None, file, key=key)
        except ConfigError as exc:
            problems += exc.problems
    return problems


# --- the summary --------------------------------------------------------------------------


def seconds(value: float) -> str:
    """1.0 -> '1 s', 0.5 -> '500 ms', 600 -> '10 min', 7776000 -> '90 d'."""
    for size, unit in ((86400.0, "d"), (3600.0, "h"), (60.0, "min")):
        if value >= size and (value / size).is_integer():
            return f"{value / size:g} {unit}"
    if 0 < value < 1:
        return f"{value * 1000:g} ms"
    return f"{value:g} s"


def _kelvin(value: float) -> str:
    return f"{value:g} K"


def _source_line(s: Any) -> str:
    if s.protocol == "modbus-tcp":
        where = f"{s.host}:{s.port} unit {s.unit_id}"
    elif s.protocol == "modbus-rtu":
        where = f"{s.device} {s.baudrate} {s.bytesize}{s.parity}{s.stopbits} unit {s.unit_id}"
    else:
        sec = s.security
        security = "no security" if sec.policy == "None" else f"{sec.policy}/{sec.mode}"
        where = f"{s.endpoint} ({s.mode}, {security})"
    n = len(s.tags)
    return (
        f"  {s.name}: {s.protocol} {where}, every {seconds(s.interval)}, "
        f"timeout {seconds(s.timeout)}, {n} tag{'s' if n != 1 else ''}"
    )


def _tag_line(t: Any) -> str:
    if hasattr(t, "address"):
        unit_id = f" unit {t.unit_id}" if t.unit_id is not None else ""
        order = f" {t.word_order}-endian words" if t.type not in ("int16", "uint16") else ""
        swap = ", bytes swapped" if t.byte_swap else ""
        where = f"{t.table} {t.address}{unit_id} {t.type}{order}{swap}"
    else:
        where = f"node {t.node}"
    parts = [f"{t.unit} {t.reference}" if t.reference else t.unit]
    if t.scale:
        parts.append("scale [" + ", ".join(f"{v:g}" for v in t.scale) + "]")
    if t.signal:
        parts.append(f"{t.signal} (NE 43 checked)")
    if t.valid_range:
        parts.append(f"valid {t.valid_range[0]:g}..{t.valid_range[1]:g}")
    if t.stale_after is not None:
        parts.append(f"stale after {seconds(t.stale_after)}")
    return f"    {t.name}: {where}; {', '.join(parts)}"


def _condition(a: Any) -> str:
    for key in LIMIT_CONDITIONS:
        if getattr(a, key) is not None:
            return f"{key} {getattr(a, key)}"
    if a.deviation is not None:
        return f"deviation from {a.deviation.signal} over {a.deviation.limit}"
    if a.rate is not None:
        return f"rate {a.rate.direction} over {a.rate.limit}"
    return "no condition"


def _secret(env: str | None, file: str | None) -> str:
    if env:
        state = "set" if os.environ.get(env) else "not set here"
        return f"from env {env} ({state})"
    if file:
        state = "present" if os.path.isfile(file) else "missing here"
        return f"from file {file} ({state})"
    return "none"


def print_summary(config: Config, filename: str, out: TextIO, builtins: int = 0) -> None:
    w = out.write
    w(f"{filename}: valid, version {config.version}\n")
    w(f"site: {config.site}\n")
    w(f"mode: {config.mode} (reads and computes; never writes to a controller)\n")
    b = config.barometer
    if b.fixed is not None:
        base = f"fixed {units.from_si(b.fixed.value, b.fixed.unit, 'pressure'):g} {b.fixed.unit}"
    else:
        base = f"altitude {b.altitude:g} m (standard atmosphere)"
    live = f", live tag {b.tag} (max age {seconds(b.max_age)})" if b.tag else ""
    w(f"barometer: {base}{live}\n")

    w(f"sources ({len(config.sources)}):\n")
    for s in config.sources:
        w(_source_line(s) + "\n")
        for t in s.tags:
            w(_tag_line(t) + "\n")
        if s.protocol == "opcua" and s.username:
            w(f"    login: {s.username}, password {_secret(s.password_env, s.password_file)}\n")

    w(f"points ({len(config.points)}):\n")
    for p in config.points:
        temp = f", temperature {p.temperature}" if p.temperature else ", no temperature"
        line = f"  {p.name}: {p.state}, pressure {p.pressure}{temp}"
        if p.state == "saturated":
            line += f", tolerance {_kelvin(p.tolerance)}"
        if p.deviation_alarm is not None:
            d = p.deviation_alarm
            line += f", deviation alarm {d.priority} after {seconds(d.on_delay)}"
        w(line + "\n")

    if config.flows:
        w(f"flows ({len(config.flows)}):\n")
        for f in config.flows:
            if f.dp is not None:
                kind = f.taps or f.convergent
                geometry = (
                    f", pipe {f.pipe * 1e3:g} mm, bore {f.bore * 1e3:g} mm"
                    if f.pipe and f.bore
                    else ""
                )
                line = f"  {f.name}: {f.meter}{f' ({kind})' if kind else ''} on dp {f.dp}{geometry}"
            else:
                line = f"  {f.name}: {f.meter} on signal {f.signal}"
            w(f"{line}, at point {f.point}\n")

    kinds = "cause, quality and saturation"
    w(f"alarms ({len(config.alarms)}, plus {builtins} built-in {kinds} alarms):\n")
    for a in config.alarms:
        extras = []
        if a.deadband:
            extras.append(f"deadband {a.deadband}")
        if a.on_delay:
            extras.append(f"on delay {seconds(a.on_delay)}")
        if a.off_delay:
            extras.append(f"off delay {seconds(a.off_delay)}")
        if a.latch:
            extras.append("latching")
        if a.realarm:
            extras.append(f"re-alarm every {seconds(a.realarm)}")
        if a.suppress_when:
            extras.append(f"suppressed when {a.suppress_when}")
        tail = f" ({', '.join(extras)})" if extras else ""
        w(f"  {a.name}: {a.signal} {_condition(a)}, priority {a.priority}{tail}\n")

    w(f"notify ({len(config.notify)}):\n")
    for c in config.notify:
        kind, url = ("webhook", c.webhook) if c.webhook else ("alertmanager", c.alertmanager)
        secret = _secret(c.secret_env, c.secret_file)
        w(f"  {c.name}: {kind} {url}, from priority {c.min_priority}, secret {secret}\n")

    if config.publish:
        from edge.config.publish import default_topic

        w(f"publish ({len(config.publish)}):\n")
        for ch in config.publish:
            if ch.format == "json":
                qos = 1 if ch.qos is None else ch.qos
                where = f"topics {ch.topic or default_topic(config.site)}/..., QoS {qos}"
            else:
                where = f"spBv1.0/{ch.group}/.../{ch.node or config.site}"
            login = f"user {ch.username}, " if ch.username else ""
            db = ch.deadband
            w(
                f"  {ch.name}: {ch.format} to {ch.mqtt}, {where}, {login}password "
                f"{_secret(ch.password_env, ch.password_file)}, deadband "
                f"{db.pressure / 1e5:g} bar / {db.temperature:g} K, "
                f"heartbeat {seconds(ch.max_silence)}\n"
            )

    h = config.http
    w(f"http: listen {h.listen}, token {_secret(h.token_env, h.token_file)}\n")
    w(
        f"storage: {config.storage.path}, keep {seconds(config.storage.retention)} "
        f"or {config.storage.max_events} events\n"
    )
