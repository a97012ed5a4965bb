"""Structured logging: JSON lines, context fields, secrets blanked."""

from __future__ import annotations

import io
import json

import pytest
import structlog

from edge import logs


@pytest.fixture(autouse=True)
def _reset():
    yield
    structlog.reset_defaults()


def test_json_line_per_event_with_context():
    """One event is one JSON line carrying its bound context."""
    out = io.StringIO()
    logs.configure("json", stream=out)
    logs.get_logger(component="source", source="boiler-plc").info("source_down", kind="timeout")
    lines = out.getvalue().splitlines()
    assert len(lines) == 1
    row = json.loads(lines[0])
    assert row["event"] == "source_down"
    assert row["source"] == "boiler-plc"
    assert row["level"] == "info"
    assert "timestamp" in row


def test_secret_fields_are_redacted():
    """A field named like a secret never shows its value."""
    out = io.StringIO()
    logs.configure("json", stream=out)
    logs.get_logger().warning("x", api_token="s3cr3t", password="hunter2", user="ops")
    text = out.getvalue()
    assert "s3cr3t" not in text and "hunter2" not in text
    assert json.loads(text)["user"] == "ops"


def test_level_filter_drops_debug():
    """At level info, debug events are not written."""
    out = io.StringIO()
    logs.configure("json", level="info", stream=out)
    logs.get_logger().debug("noise")
    assert out.getvalue() == ""


def test_console_format_is_not_json():
    """The console format is for humans: the event name is there, not a JSON object."""
    out = io.StringIO()
    logs.configure("console", stream=out)
    logs.get_logger().info("started")
    assert "started" in out.getvalue()
    assert not out.getvalue().lstrip().startswith("{")


def test_unknown_format_is_refused():
    """A format other than json/console is a readable error."""
    with pytest.raises(ValueError, match="json"):
        logs.configure("xml")


def test_library_warnings_become_json_lines():
    """A library's stdlib warning comes out as one JSON event naming its logger."""
    import logging

    root = logging.getLogger()
    saved = (root.handlers[:], root.level)
    out = io.StringIO()
    try:
        logs.configure("json", stream=out, capture_stdlib=True)
        logging.getLogger("pymodbus.logging").warning("Failed to connect %s", "x")
        logging.getLogger("pymodbus.logging").info("chatter")
    finally:
        root.handlers, root.level = saved[0], saved[1]
    lines = out.getvalue().splitlines()
    assert len(lines) == 1
    row = json.loads(lines[0])
    assert row["event"] == "Failed to connect x"
    assert row["logger"] == "pymodbus.logging" and row["level"] == "warning"
