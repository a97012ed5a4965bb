"""OPC UA DataValue -> Sample conversion with real asyncua DataValues (no server needed)."""

from __future__ import annotations

import datetime as dt
import math

import pytest
from asyncua import ua

from edge.config import OpcUaTag
from edge.sources.opcua_values import TagChannel, status_name, status_quality

NOW = 1_800_000_000.0
ZERO_C = 273.15  # K; common practice


def channel(**tag: object) -> TagChannel:
    spec = {"name": "hp_t", "node": "ns=2;s=HP.Temperature", "unit": "degC", **tag}
    return TagChannel.build(OpcUaTag.model_validate(spec))


def data_value(value: object, code: int = 0, **stamps: dt.datetime) -> ua.DataValue:
    return ua.DataValue(ua.Variant(value), StatusCode=ua.StatusCode(code), **stamps)


def test_severity_bits_give_the_quality_level():
    """Severity 00 good, 01 uncertain, 10 and 11 bad (OPC UA Part 4, StatusCode; from memory)."""
    assert status_quality(0).name == "good"
    assert status_quality(ua.StatusCodes.UncertainLastUsableValue).name == "uncertain"
    assert status_quality(ua.StatusCodes.BadSensorFailure).name == "bad"
    assert status_quality(0xC0000000).name == "bad"


def test_info_bits_do_not_change_the_code_name():
    """Limit and overflow info bits (low 16 bits) are ignored when naming the code."""
    code = ua.StatusCodes.UncertainEngineeringUnitsExceeded | 0x0000_0500
    assert status_quality(code).reason == "UncertainEngineeringUnitsExceeded"


def test_an_unknown_code_is_named_in_hex():
    """A code the library does not know still gets a bounded, readable name."""
    assert status_name(0x80FE0000) == "0x80FE0000"


def test_server_timestamp_stands_in_for_a_missing_source_timestamp():
    """No SourceTimestamp: the ServerTimestamp is used; neither: the receive time."""
    stamp = dt.datetime(2026, 5, 4, 3, 2, 1, tzinfo=dt.UTC)
    with_server, _ = channel().from_data_value(data_value(180.0, ServerTimestamp=stamp), NOW)
    bare, _ = channel().from_data_value(data_value(180.0), NOW)
    assert with_server.source_time == stamp.timestamp()
    assert bare.source_time == NOW


def test_uncertain_value_outside_its_valid_range_is_bad():
    """Uncertain status plus a value outside valid_range: bad/out_of_range (worst wins)."""
    ch = channel(valid_range=[0, 400])
    code = ua.StatusCodes.UncertainSensorNotAccurate
    s, _ = ch.from_data_value(data_value(450.0, code), NOW)
    assert (s.quality.name, s.quality.reason) == ("bad", "out_of_range")
    assert math.isnan(s.value)


def test_a_string_explains_itself_once_for_the_log():
    """A non-numeric value comes with a one-line explanation naming the variant type."""
    s, detail = channel().from_data_value(data_value("hot"), NOW)
    assert s.quality.reason == "not_a_number"
    assert detail == "node ns=2;s=HP.Temperature holds a String, not a number"


def test_last_good_is_carried_on_a_bad_sample():
    """After a good 180 degC, a Bad sample carries 453.15 K as last_good."""
    ch = channel()
    ch.from_data_value(data_value(180.0), NOW)
    s, _ = ch.from_data_value(data_value(None, ua.StatusCodes.BadOutOfService), NOW + 1)
    assert s.last_good == pytest.approx(180.0 + ZERO_C)
    assert s.quality.reason == "BadOutOfService"


def test_link_loss_sample_is_comm_loss_with_last_good():
    """lost() gives bad/comm_loss stamped now, with the last good value as context."""
    ch = channel()
    ch.from_data_value(data_value(180.0), NOW)
    s = ch.lost("comm_loss", NOW + 5)
    assert (s.quality.reason, s.receive_time, s.source_time) == ("comm_loss", NOW + 5, NOW + 5)
    assert s.last_good == pytest.approx(180.0 + ZERO_C)


def test_malformed_node_id_is_a_standing_config_fault():
    """A node string that is no NodeId: bad/config, even while the link is down."""
    ch = channel(node="ns=2;x=Nope")
    assert ch.node is None
    assert ch.lost("comm_loss", NOW).quality.reason == "config"
