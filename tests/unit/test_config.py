"""Config loading: YAML lines, readable messages, cross-checks and the helpers others call."""

from __future__ import annotations

import inspect
import textwrap
from pathlib import Path
from typing import get_args

import pytest
from pydantic import BaseModel

from edge.config import (
    Config,
    Point,
    load_config,
    parse_config,
    parse_difference,
    parse_level,
    parse_listen,
    parse_suppress,
    signal_of,
    tag_kind,
)
from edge.config.yaml_lines import MAX_NODES, format_path, parse_path, read_yaml
from edge.errors import ConfigError, UnitError

BASE = """\
version: 1
site: test-works
barometer: {fixed: 101.325 kPa}
sources:
  - name: plc
    protocol: modbus-tcp
    host: 127.0.0.1
    tags:
      - {name: drum_p, table: holding, address: 0, type: float32, unit: bar, reference: gauge}
      - {name: drum_t, table: input, address: 10, type: int16, unit: degC}
points:
  - {name: drum, pressure: drum_p, temperature: drum_t, state: saturated}
"""


def problems(text: str) -> list[str]:
    """Every problem parse_config reports, as printed (``file:line: path: message``)."""
    with pytest.raises(ConfigError) as info:
        parse_config(textwrap.dedent(text), "c.yaml")
    return [str(p) for p in info.value.problems]


def with_base(extra: str) -> str:
    return BASE + textwrap.dedent(extra)


# --- YAML and lines -------------------------------------------------------------------------


def test_lines_of_keys_and_items() -> None:
    """Every mapping key and sequence item records its 1-based line."""
    doc = read_yaml(BASE, "c.yaml")
    assert doc.lines[("site",)] == 2
    assert doc.lines[("sources", 0)] == 5
    assert doc.lines[("sources", 0, "host")] == 7
    assert doc.lines[("sources", 0, "tags", 1)] == 10
    assert doc.lines[("sources", 0, "tags", 1, "unit")] == 10


def test_missing_key_takes_line_of_its_mapping() -> None:
    """A path not in the file is placed at its nearest ancestor's line."""
    doc = read_yaml(BASE, "c.yaml")
    assert doc.line_of(("sources", 0, "tags", 1, "reference")) == 10
    assert doc.line_of(("sources", 0, "port")) == 5


def test_format_path() -> None:
    """Keys join with dots, list indexes go in brackets."""
    assert format_path(("sources", 0, "tags", 2, "reference")) == "sources[0].tags[2].reference"


def test_parse_path_inverts_format_path() -> None:
    """A printed path turns back into its parts (for problems found after loading)."""
    assert parse_path("alarms[3].deviation.signal") == ("alarms", 3, "deviation", "signal")


def test_yaml_syntax_error_names_line() -> None:
    """A YAML syntax error becomes one problem with its line."""
    (msg,) = problems("version: 1\nsite: x\n  bad: indent\n")
    # libyaml ends it "in this context", the pure-Python parser "here"
    assert msg.startswith("c.yaml:3: invalid YAML: mapping values are not allowed")


def test_key_given_twice() -> None:
    """A duplicate key is an error at its second line, naming the first."""
    text = BASE.replace("site: test-works\n", "site: test-works\nsite: other\n")
    assert problems(text) == ["c.yaml:3: site: key 'site' is given twice (first on line 2)"]


def test_non_text_key() -> None:
    """A key that YAML reads as a number is reported, not silently converted."""
    assert problems(BASE + "5: x\n") == [
        "c.yaml:13: keys are names, got 5 (quote it if it is meant as text)"
    ]


def test_alias_that_refers_to_itself() -> None:
    """A recursive alias is one problem, not a hang or a traceback."""
    msgs = problems(BASE + "extra: &a [*a]\n")
    assert "c.yaml:13: extra[0]: an alias refers to itself" in msgs


def test_alias_bomb_is_stopped() -> None:
    """Aliases that expand to billions of values stop with one problem, quickly."""
    lines = ["a0: &a0 [x, x, x, x, x, x, x, x, x, x]"]
    lines += [f"a{i}: &a{i} [" + ", ".join([f"*a{i - 1}"] * 10) + "]" for i in range(1, 10)]
    (msg,) = problems("\n".join(lines) + "\n")
    assert msg.endswith(f"the file expands to more than {MAX_NODES} values")


def test_a_large_site_is_not_mistaken_for_an_alias_bomb() -> None:
    """20,000 tags hold ~190,000 values, more than MAX_NODES: without aliases a file may
    hold one value per byte, so only alias expansion meets the limit."""
    from tests.bench.service import config

    text = config(10_000, 1502, Path("/tmp/none.sqlite"))
    doc = read_yaml(text, "big.yaml")
    assert doc.problems == []
    assert len(doc.data["sources"][0]["tags"]) == 20_000
    assert doc.line_of(("points", 9_999, "name")) == text.count("\n", 0, text.index("pt9999")) + 1


def test_merge_lists_and_alias_lines() -> None:
    """``<<`` with a list: the first mapping wins, keys written here win over both; an
    alias item is reported on the alias's own line."""
    doc = read_yaml(
        "a: &x {p: 1}\nb: &y {p: 2, q: 3}\nc: {<<: [*x, *y], r: 4}\nd: {r: 0, <<: *x, p: 9}\n"
        "e:\n  - *x\n",
        "m.yaml",
    )
    assert doc.data["c"] == {"p": 1, "q": 3, "r": 4}
    assert doc.data["d"] == {"r": 0, "p": 9}
    assert doc.lines[("c", "p")] == 1 and doc.lines[("c", "q")] == 2
    assert doc.lines[("d", "p")] == 4
    assert doc.lines[("e", 0)] == 6


def test_python_tags_are_refused() -> None:
    """A YAML tag asking for a Python object is refused, never constructed."""
    assert problems('!!python/object/apply:os.system ["true"]\n') == [
        "c.yaml:1: YAML tag 'tag:yaml.org,2002:python/object/apply:os.system' is not supported"
    ]


def test_limit_without_unit() -> None:
    """A bare number as an alarm limit asks for a unit."""
    assert problems(with_base("alarms: [{name: a, signal: drum.tsat, high: 190}]\n")) == [
        "c.yaml:13: alarms[0].high: expected a quantity with a unit "
        "(e.g. '11 bara', '190 degC', '2 K'), got 190"
    ]


def test_merge_keys_work() -> None:
    """YAML merge keys (<<) fill a mapping from an anchor."""
    text = BASE.replace(
        "      - {name: drum_t, table: input, address: 10, type: int16, unit: degC}",
        "      - &t {name: drum_t, table: input, address: 10, type: int16, unit: degC}\n"
        "      - {<<: *t, name: drum_t2, address: 11}",
    )
    assert parse_config(text, "c.yaml").tags()["drum_t2"].table == "input"


# --- schema messages ----------------------------------------------------------------------


def test_values_are_converted_to_si() -> None:
    """Durations, differences and pressures come back in SI."""
    cfg = parse_config(
        BASE.replace("host: 127.0.0.1", "host: 127.0.0.1\n    interval: 500 ms"), "c.yaml"
    )
    assert isinstance(cfg, Config)
    assert cfg.sources[0].interval == 0.5
    assert cfg.points[0].tolerance == 2.0
    assert cfg.barometer.fixed is not None and cfg.barometer.fixed.value == 101_325.0


def test_literal_message_with_suggestion() -> None:
    """A wrong choice lists the accepted ones and suggests the closest."""
    text = BASE.replace("state: saturated", "state: saturate")
    assert problems(text) == [
        "c.yaml:12: points[0].state: expected 'saturated', 'superheated' or 'subcooled', "
        "got 'saturate' (did you mean 'saturated'?)"
    ]


def test_unknown_key_without_close_match_lists_keys() -> None:
    """An unknown key with no near spelling lists the accepted keys."""
    (msg,) = problems(BASE.replace("barometer: {fixed", "barometer: {zzz: 1, fixed"))
    assert msg.startswith("c.yaml:3: barometer.zzz: unknown key 'zzz'; accepted: fixed, altitude")


def test_inline_token_names_env_and_file() -> None:
    """A token written in the file points to token_env / token_file."""
    assert problems(with_base("http: {token: abc}\n")) == [
        "c.yaml:13: http.token: secrets never sit in the file: use token_env (an environment "
        "variable) or token_file (a file to read) instead of 'token'"
    ]


def test_union_paths_carry_no_member_names() -> None:
    """An error inside an OPC UA source has a clean path (no union tag, no class name)."""
    text = BASE.replace(
        "sources:\n",
        "sources:\n  - {name: ua, protocol: opcua, endpoint: "
        "'opc.tcp://h:4840', tags: [{name: x, node: n, unit: degC, "
        "valid_range: [0]}]}\n",
    )
    (msg,) = problems(text)
    assert msg == "c.yaml:5: sources[0].tags[0].valid_range: expected 2 items, got 1"


def test_missing_protocol_lists_choices() -> None:
    """A source without protocol says which protocols exist."""
    (msg,) = problems(BASE.replace("    protocol: modbus-tcp\n", ""))
    assert msg == (
        "c.yaml:5: sources[0].protocol: missing required key 'protocol'; "
        "one of: modbus-tcp, modbus-rtu, opcua"
    )


def test_scale_needs_four_numbers() -> None:
    """A short scale list says how many numbers it needs."""
    (msg,) = problems(BASE.replace("unit: degC}", "unit: degC, scale: [0, 1, 2]}"))
    assert msg == "c.yaml:10: sources[0].tags[1].scale: expected 4 items, got 3"


def test_bare_number_rejected_from_file_but_si_allowed_in_code() -> None:
    """`tolerance: 2` in a file is an error; Point(tolerance=2.0) in code is SI."""
    (msg,) = problems(BASE.replace("state: saturated}", "state: saturated, tolerance: 2}"))
    assert msg.endswith("points[0].tolerance: expected a quantity with a unit, e.g. '2 K', got 2")
    assert Point(name="p", pressure="a", state="saturated", tolerance=2.0).tolerance == 2.0


def test_unit_suffix_declares_reference() -> None:
    """A tag in psig needs no separate reference: it is gauge."""
    cfg = parse_config(BASE.replace("unit: bar, reference: gauge", "unit: psig"), "c.yaml")
    assert cfg.tags()["drum_p"].reference == "gauge"


def test_empty_text_and_scalar_text() -> None:
    """An empty document and a bare scalar are one problem each."""
    assert problems("# only a comment\n") == ["c.yaml: the file is empty"]
    assert problems("hello\n") == [
        "c.yaml:1: expected a mapping of keys (version, site, ...), got 'hello'"
    ]


# --- cross-checks -------------------------------------------------------------------------


def test_every_error_is_reported_in_line_order() -> None:
    """Schema and cross-check errors come together, sorted by line."""
    text = BASE.replace("host: 127.0.0.1", "host: 127.0.0.1\n    port: 70000")
    text = text.replace("pressure: drum_p,", "pressure: nope,")
    text = text.replace("unit: degC}", "unit: degZ}")
    assert [p.split(": ")[1] for p in problems(text)] == [
        "sources[0].port",
        "sources[0].tags[1].unit",
        "points[0].pressure",
    ]


def test_point_naming_a_broken_tag_gets_no_second_error() -> None:
    """A point naming a tag whose own definition failed is not also reported."""
    text = BASE.replace("type: int16, unit: degC", "type: int8, unit: degC")
    (msg,) = problems(text)
    assert "sources[0].tags[1].type" in msg


def test_cross_checks_run_beside_schema_errors() -> None:
    """A schema error in one source does not hide a cross-check error elsewhere."""
    text = BASE.replace("reference: gauge}", "reference: gauge, byte_swap: perhaps}")
    text = text.replace("temperature: drum_t", "temperature: drum_tt")
    msgs = problems(text)
    assert len(msgs) == 2
    assert "byte_swap: expected true or false, got 'perhaps'" in msgs[0]
    assert msgs[1] == (
        "c.yaml:12: points[0].temperature: no tag named 'drum_tt' (did you mean 'drum_t'?)"
    )


def test_unit_id_override_avoids_overlap() -> None:
    """Two tags on the same register of different unit ids do not overlap."""
    text = BASE.replace(
        "unit: degC}",
        "unit: degC}\n      - {name: x, table: holding, address: 1, unit_id: 2, unit: K}",
    )
    assert parse_config(text, "c.yaml").tags()["x"].unit_id == 2


def test_overlap_inside_float64() -> None:
    """A uint16 inside a float64's four registers overlaps it."""
    text = BASE.replace("type: float32, unit: bar", "type: float64, unit: bar").replace(
        "unit: degC}", "unit: degC}\n      - {name: x, table: holding, address: 3, unit: K}"
    )
    (msg,) = problems(text)
    assert msg == (
        "c.yaml:11: sources[0].tags[2].address: holding registers 3 of unit 1 overlap tag "
        "'drum_p' (0..3, sources[0].tags[0])"
    )


DUPLICATES = {
    "source": (
        BASE.replace(
            "sources:\n",
            "sources:\n  - {name: plc, protocol: modbus-tcp, host: h, tags: "
            "[{name: x, table: holding, address: 0, unit: K}]}\n",
        ),
        "c.yaml:6: sources[1].name: duplicate source name 'plc' (first at sources[0])",
    ),
    "point": (
        BASE + "  - {name: drum, pressure: drum_p, state: superheated}\n",
        "c.yaml:13: points[1].name: duplicate point name 'drum' (first at points[0])",
    ),
    "alarm": (
        with_base(
            "alarms:\n  - {name: a, signal: drum.tsat, high: 190 degC}\n"
            "  - {name: a, signal: drum.tsat, high: 191 degC}\n"
        ),
        "c.yaml:15: alarms[1].name: duplicate alarm name 'a' (first at alarms[0])",
    ),
    "channel": (
        with_base(
            "notify:\n  - {name: c, alertmanager: 'http://127.0.0.1:9093'}\n"
            "  - {name: c, alertmanager: 'http://127.0.0.1:9094'}\n"
        ),
        "c.yaml:15: notify[1].name: duplicate channel name 'c' (first at notify[0])",
    ),
}


@pytest.mark.parametrize(("text", "expected"), DUPLICATES.values(), ids=DUPLICATES.keys())
def test_duplicate_names_of_every_kind(text: str, expected: str) -> None:
    """Sources, points, alarms and channels need unique names, like tags."""
    assert problems(text) == [expected]


@pytest.mark.parametrize(
    ("signal", "expected"),
    [
        ("boiler.tsat", "no point named 'boiler' and no tag named 'boiler.tsat'"),
        ("drum_tt", "no tag named 'drum_tt' and no '<point>.<quantity>' of that name"),
    ],
)
def test_alarm_naming_a_missing_point_or_tag(signal: str, expected: str) -> None:
    """An alarm whose signal names no point and no tag is an error at its signal."""
    (msg,) = problems(with_base(f"alarms:\n  - {{name: a, signal: {signal}, high: 190 degC}}\n"))
    assert msg.startswith(f"c.yaml:14: alarms[0].signal: {expected}")


def test_inline_webhook_secret_names_env_and_file() -> None:
    """A channel secret written in the file points to secret_env / secret_file."""
    channel = "{name: c, webhook: 'https://hooks.example.invalid/x', secret: abc}"
    (msg,) = problems(with_base(f"notify:\n  - {channel}\n"))
    assert msg == (
        "c.yaml:14: notify[0].secret: secrets never sit in the file: use secret_env (an "
        "environment variable) or secret_file (a file to read) instead of 'secret'"
    )


def _with_tags(*tags: str) -> str:
    lines = "".join(f"\n      - {t}" for t in tags)
    return BASE.replace("unit: degC}", "unit: degC}" + lines, 1)


def test_registers_of_other_tables_and_neighbours_do_not_overlap() -> None:
    """The same address in the input table, and the register right after a float32, are
    free: only one unit's one table is one address space."""
    text = _with_tags(
        "{name: x, table: input, address: 0, type: float32, unit: K}",
        "{name: y, table: holding, address: 2, unit: K}",
    )
    assert set(parse_config(text, "c.yaml").tags()) == {"drum_p", "drum_t", "x", "y"}


def test_explicit_unit_id_equal_to_the_source_still_overlaps() -> None:
    """unit_id: 1 on a tag of a unit-1 source is the same device: the overlap is reported."""
    (msg,) = problems(_with_tags("{name: y, table: holding, address: 1, unit: K, unit_id: 1}"))
    assert msg.startswith("c.yaml:11: sources[0].tags[2].address: holding registers 1 of unit 1")


def test_last_registers_of_the_address_space() -> None:
    """A uint16 at 65535 and an int32 at 65534 fit; a float32 at 65535 does not."""
    fits = _with_tags(
        "{name: x, table: input, address: 65535, unit: K}",
        "{name: y, table: holding, address: 65534, type: int32, unit: K}",
    )
    assert parse_config(fits, "c.yaml").tags()["y"].address == 65534
    (msg,) = problems(_with_tags("{name: z, table: input, address: 65535, type: float32, unit: K}"))
    assert msg == (
        "c.yaml:11: sources[0].tags[2].address: a float32 takes 2 registers (65535..65536) "
        "but the last register address is 65535"
    )


def test_barometer_needs_a_value() -> None:
    """A barometer with only a live tag has nothing to fall back on."""
    (msg,) = problems(
        BASE.replace("barometer: {fixed: 101.325 kPa}", "barometer: {max_age: 1 min}")
    )
    assert msg == (
        "c.yaml:3: barometer: give one of fixed (e.g. '101.325 kPa') or altitude (e.g. '420 m')"
    )


def test_username_needs_password() -> None:
    """An OPC UA username without password_env/password_file is an error."""
    text = BASE.replace(
        "sources:\n",
        "sources:\n  - {name: ua, protocol: opcua, username: u, "
        "endpoint: 'opc.tcp://h:4840', tags: [{name: x, node: n, unit: K}]}\n",
    )
    assert problems(text) == [
        "c.yaml:5: sources[0].username: a username needs password_env or password_file"
    ]


def test_deviation_between_different_kinds() -> None:
    """A deviation alarm cannot compare a pressure with a temperature."""
    msgs = problems(
        with_base("""\
        alarms:
          - {name: a, signal: drum.pressure, deviation: {signal: drum_t, limit: 0.5 bar}}
        """)
    )
    assert msgs == [
        "c.yaml:14: alarms[0].deviation.signal: 'drum_t' (temperature) cannot be compared "
        "with 'drum.pressure' (absolute pressure)"
    ]


def test_negative_deadband() -> None:
    """A deadband cannot be negative."""
    msgs = problems(
        with_base("""\
        alarms:
          - {name: a, signal: drum.temperature, high: 190 degC, deadband: -1 K}
        """)
    )
    assert msgs == ["c.yaml:14: alarms[0].deadband: '-1 K': a difference cannot be negative"]


def test_alarm_without_condition() -> None:
    """An alarm needs one condition."""
    assert problems(with_base("alarms:\n  - {name: a, signal: drum.tsat}\n")) == [
        "c.yaml:14: alarms[0]: an alarm needs one condition: "
        "high_high, high, low, low_low, deviation, rate"
    ]


def test_alarm_named_like_a_comm_alarm_clashes_in_builtins() -> None:
    """An alarm named 'plc-comm' clashes with source plc's built-in comm alarm."""
    msgs = problems(with_base("alarms:\n  - {name: plc-comm, signal: drum.tsat, high: 200 degC}\n"))
    assert msgs == [
        "c.yaml:14: alarms[0].name: alarm name 'plc-comm' is taken by the comm alarm "
        "of source 'plc'"
    ]


# --- loading files ------------------------------------------------------------------------


def test_relative_files_resolve_against_config_folder(tmp_path: Path) -> None:
    """Relative storage and secret file names are taken from the config file's folder."""
    cfg = tmp_path / "site.yaml"
    cfg.write_text(
        BASE + "http: {token_file: secrets/token}\nstorage: {path: state.sqlite}\n",
        encoding="utf-8",
    )
    loaded = load_config(cfg)
    assert loaded.storage.path == str(tmp_path / "state.sqlite")
    assert loaded.http.token_file == str(tmp_path / "secrets" / "token")


def test_example_loads() -> None:
    """config/example.yaml loads with every source kind."""
    cfg = load_config(Path(__file__).resolve().parents[2] / "config" / "example.yaml")
    assert [s.protocol for s in cfg.sources] == ["modbus-tcp", "modbus-rtu", "opcua", "opcua"]


def _keys_set(value: object, found: set[tuple[str, str]]) -> None:
    """Collect (declaring class, field) of every field the file set, recursively."""
    if isinstance(value, BaseModel):
        for name in value.model_fields_set:
            owner = next(c for c in type(value).__mro__ if name in inspect.get_annotations(c))
            found.add((owner.__name__, name))
            _keys_set(getattr(value, name), found)
    elif isinstance(value, list | tuple):
        for item in value:
            _keys_set(item, found)
    elif isinstance(value, dict):  # e.g. publish[].points: point name -> deadbands
        for item in value.values():
            _keys_set(item, found)


def _all_keys(model: type[BaseModel], found: set[tuple[str, str]]) -> None:
    for cls in model.__mro__:
        for name in inspect.get_annotations(cls):
            if name in model.model_fields and (cls.__name__, name) not in found:
                found.add((cls.__name__, name))
                for sub in _models_in(model.model_fields[name].annotation):
                    _all_keys(sub, found)


def _models_in(tp: object) -> list[type[BaseModel]]:
    if isinstance(tp, type) and issubclass(tp, BaseModel):
        return [tp]
    return [m for arg in get_args(tp) for m in _models_in(arg)]


def test_example_uses_every_key() -> None:
    """config/example.yaml sets every key of the schema (except the other half of a pair)."""
    cfg = load_config(Path(__file__).resolve().parents[2] / "config" / "example.yaml")
    used: set[tuple[str, str]] = set()
    _keys_set(cfg, used)
    schema: set[tuple[str, str]] = set()
    _all_keys(Config, schema)
    one_of_pair = {("Barometer", "fixed"), ("Http", "token_file")}  # shown in comments
    assert schema - used == one_of_pair


# --- helpers ------------------------------------------------------------------------------


def test_tag_kind() -> None:
    """tag_kind follows the unit."""
    tags = parse_config(BASE, "c.yaml").tags()
    assert (tag_kind(tags["drum_p"]), tag_kind(tags["drum_t"])) == ("pressure", "temperature")


def test_levels_and_differences_in_si() -> None:
    """Limits parse to SI by the signal's kind (1 bar = 100 kPa, by definition)."""
    cfg = parse_config(BASE, "c.yaml")
    pressure = signal_of(cfg, "drum.pressure")
    assert (pressure.kind, pressure.reference) == ("pressure", "absolute")
    assert parse_level("11 bara", pressure) == pytest.approx(1.1e6)
    assert parse_difference("0.2 bar", pressure) == pytest.approx(2e4)
    assert parse_level("190 degC", signal_of(cfg, "drum_t")) == pytest.approx(463.15)
    assert parse_difference("9 delta degF", signal_of(cfg, "drum_t")) == pytest.approx(5.0)
    assert parse_level("2900 kJ/kg", signal_of(cfg, "drum.enthalpy")) == pytest.approx(2.9e6)


def test_property_limits_take_every_unit_of_their_kind() -> None:
    """A property limit takes the units of edge.units: MJ/kg, Btu/lb, g/cm3, lb/ft3."""
    cfg = parse_config(BASE, "c.yaml")
    enthalpy, density = signal_of(cfg, "drum.enthalpy"), signal_of(cfg, "drum.density")
    assert parse_level("2.9 MJ/kg", enthalpy) == pytest.approx(2.9e6)
    # from memory: 1 Btu(IT)/lb = 2.326 kJ/kg; 1 lb/ft3 = 16.0185 kg/m3
    assert parse_level("1200 Btu/lb", enthalpy) == pytest.approx(1200 * 2326.0)
    assert parse_level("0.9 g/cm3", density) == pytest.approx(900.0)
    assert parse_level("1 lb/ft3", density) == pytest.approx(16.018463, rel=1e-7)


def test_pressure_difference_refuses_reference() -> None:
    """A deadband written as barg is refused: a difference has no reference."""
    cfg = parse_config(BASE, "c.yaml")
    with pytest.raises(UnitError, match="a pressure difference has no reference"):
        parse_difference("0.2 barg", signal_of(cfg, "drum.pressure"))


def test_parse_listen() -> None:
    """host:port and [v6]:port parse; a missing port does not."""
    assert parse_listen("127.0.0.1:9847") == ("127.0.0.1", 9847)
    assert parse_listen("[::1]:0") == ("::1", 0)
    with pytest.raises(ValueError, match="host:port"):
        parse_listen("localhost")


def test_parse_suppress() -> None:
    """A suppression splits into signal, comparison and quantity."""
    assert parse_suppress("hp_header.pressure < 5 bara") == ("hp_header.pressure", "<", "5 bara")
