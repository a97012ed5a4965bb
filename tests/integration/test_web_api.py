"""The HTTP API of a running monitor: a real Modbus server, a real aiohttp server, a real
SQLite journal; authentication, operator actions, body limits, JSON errors, OpenAPI."""

from __future__ import annotations

import aiohttp
import pytest
import pytest_asyncio
import yaml

from edge.errors import ConfigError
from tests.integration.modbus_server import modbus_server
from tests.integration.servicekit import (
    auth,
    get_json,
    post,
    registers,
    running_monitor,
    wait_for,
    write_config,
)

pytestmark = pytest.mark.asyncio

ALARM = "drum-superheat-low"
URL = "/api/v1/alarms/" + ALARM


async def _raised(monitor):
    """Wait until the low-superheat alarm stands unacknowledged."""
    await wait_for(lambda: monitor.alarm_states[ALARM].state == "unacknowledged")


@pytest_asyncio.fixture
async def low_superheat(tmp_path, token_env):
    """A monitor whose drum superheat (0.5 K) is below the alarm limit (5 K)."""
    # 9 barg + 97 kPa -> Tsat about 179.5 degC; 180.0 degC is barely superheated
    async with modbus_server(holding=registers(drum_c=180.0)) as plc:
        config = write_config(tmp_path / "edge.yaml", plc.port)
        async with running_monitor(config) as monitor:
            await _raised(monitor)
            yield monitor


async def test_post_without_token_is_401_and_changes_nothing(low_superheat):
    """No Authorization header: 401, and the alarm stays unacknowledged."""
    status, body = await post(low_superheat.url + URL + "/ack", {"user": "ops"})
    assert status == 401
    assert body["error"] == "unauthorized" and "detail" in body
    assert low_superheat.alarm_states[ALARM].unacknowledged
    assert low_superheat.events(0, 1000)[-1].kind == "raised"


async def test_post_with_wrong_token_is_401_and_changes_nothing(low_superheat):
    """A wrong bearer token: 401, and no acknowledgement in state or journal."""
    status, _ = await post(low_superheat.url + URL + "/ack", {"user": "ops"}, auth("wrong"))
    assert status == 401
    assert low_superheat.alarm_states[ALARM].unacknowledged
    assert all(e.kind != "acknowledged" for e in low_superheat.events(0, 1000))


async def test_unknown_alarm_without_token_is_401_not_404(low_superheat):
    """An unauthenticated caller cannot learn which alarms exist."""
    status, _ = await post(low_superheat.url + "/api/v1/alarms/no-such/ack", {"user": "x"})
    assert status == 401


async def test_unknown_alarm_with_token_is_404(low_superheat):
    """With the token, an unknown alarm is a JSON 404."""
    status, body = await post(
        low_superheat.url + "/api/v1/alarms/no-such/ack", {"user": "ops"}, auth()
    )
    assert status == 404 and body["error"] == "unknown_alarm"


async def test_ack_with_token_changes_state_and_lands_in_journal(low_superheat):
    """An acknowledgement with the token changes the state and is journalled with the user."""
    status, body = await post(
        low_superheat.url + URL + "/ack", {"user": "ops-anna", "comment": "seen"}, auth()
    )
    assert status == 200
    assert body["alarm"]["state"] == "acknowledged"
    assert low_superheat.alarm_states[ALARM].state == "acknowledged"
    acks = [e for e in low_superheat.events(0, 1000) if e.kind == "acknowledged"]
    assert len(acks) == 1 and acks[0].user == "ops-anna" and acks[0].id is not None


async def test_shelve_with_token_changes_state_and_lands_in_journal(low_superheat):
    """A timed shelve with the token shelves the alarm and is journalled with its reason."""
    status, body = await post(
        low_superheat.url + URL + "/shelve",
        {"user": "ops-anna", "duration": "30 min", "reason": "burner service"},
        auth(),
    )
    assert status == 200 and body["alarm"]["state"] == "shelved"
    state = low_superheat.alarm_states[ALARM]
    assert state.shelved_until is not None
    assert 1790 < state.shelved_until - low_superheat.clock() <= 1800
    shelved = [e for e in low_superheat.events(0, 1000) if e.kind == "shelved"]
    assert shelved and shelved[-1].comment == "burner service"


async def test_shelve_refused_by_the_alarm_philosophy_is_409_with_the_rule(tmp_path, token_env):
    """A site that shelves no critical alarm: the API refuses, naming the rule."""
    async with modbus_server(holding=registers(drum_c=180.0)) as plc:
        config = write_config(tmp_path / "edge.yaml", plc.port, shelvable="[high, medium]")
        async with running_monitor(config) as monitor:
            await _raised(monitor)
            body = {"user": "ops", "duration": "30 min", "reason": "burner service"}
            status, out = await post(monitor.url + URL + "/shelve", body, auth())
            assert status == 409 and out["error"] == "not_allowed"
            assert "shelvable_priorities" in out["detail"] and "critical" in out["detail"]
            assert monitor.alarm_states[ALARM].state == "unacknowledged"


async def test_shelve_beyond_the_longest_allowed_is_409(low_superheat):
    """A shelve longer than alarm_philosophy.max_shelve (2 h here) is refused."""
    body = {"user": "ops", "duration": "3 h", "reason": "burner service"}
    status, out = await post(low_superheat.url + URL + "/shelve", body, auth())
    assert status == 409 and "at most 2 h" in out["detail"]


async def test_shelve_without_reason_is_400(low_superheat):
    """Shelving needs a reason; the alarm is not shelved."""
    status, body = await post(low_superheat.url + URL + "/shelve", {"user": "ops"}, auth())
    assert status == 400 and body["error"] == "bad_request"
    assert not low_superheat.alarm_states[ALARM].shelved


async def test_unshelve_and_out_of_service_round_trip(low_superheat):
    """Unshelve ends a shelve; out-of-service and in-service are journalled."""
    base = low_superheat.url + URL
    body = {"user": "ops", "reason": "sensor swap"}
    assert (await post(base + "/shelve", body, auth()))[0] == 200
    assert (await post(base + "/unshelve", {"user": "ops"}, auth()))[0] == 200
    assert not low_superheat.alarm_states[ALARM].shelved
    assert (await post(base + "/out-of-service", body, auth()))[0] == 200
    assert low_superheat.alarm_states[ALARM].state == "out_of_service"
    assert (await post(base + "/in-service", {"user": "ops"}, auth()))[0] == 200
    kinds = [e.kind for e in low_superheat.events(0, 1000)]
    assert {"shelved", "unshelved", "out_of_service", "in_service"} <= set(kinds)


async def test_oversized_body_is_413(low_superheat):
    """A body above http.max_body (64 KiB by default) is refused with 413."""
    big = {"user": "ops", "comment": "x" * 70_000}
    status, body = await post(low_superheat.url + URL + "/ack", big, auth())
    assert status == 413 and body["error"] == "body_too_large"
    assert low_superheat.alarm_states[ALARM].unacknowledged


async def test_oversized_body_without_token_is_401(low_superheat):
    """The token is checked before the body size."""
    big = {"user": "ops", "comment": "x" * 70_000}
    status, _ = await post(low_superheat.url + URL + "/ack", big)
    assert status == 401


async def test_invalid_json_is_400(low_superheat):
    """A body that is not JSON is a JSON 400."""
    async with (
        aiohttp.ClientSession() as s,
        s.post(low_superheat.url + URL + "/ack", data=b"{nope", headers=auth()) as r,
    ):
        assert r.status == 400
        assert (await r.json())["error"] == "bad_request"


async def test_points_in_si_and_display_units(low_superheat):
    """GET points: absolute pressure in Pa (gauge + barometer tag) and in bar(a)."""
    status, body = await get_json(low_superheat.url + "/api/v1/points")
    assert status == 200
    drum = next(p for p in body["points"] if p["name"] == "drum")
    pressure = drum["readings"]["pressure"]
    # float32 of 9.0 bar and 97.0 kPa are exact: 900 000 Pa + 97 000 Pa
    assert pressure["value"] == pytest.approx(997_000.0, abs=1e-6)
    assert pressure["display"] == {"value": pytest.approx(9.97), "unit": "bar(a)"}
    assert drum["quality"] == "good"
    # 0.5 K of superheat is inside the point's 2 K band: its phase cannot be told
    assert drum["phase"] == "near_saturation"
    assert drum["readings"]["enthalpy"]["reason"] == "near_saturation"
    assert drum["time"].endswith("Z") and body["time"].endswith("Z")  # RFC 3339, UTC


async def test_alarms_and_events_listing(low_superheat):
    """GET alarms shows the standing alarm; GET events pages the journal by id."""
    _, alarms = await get_json(low_superheat.url + "/api/v1/alarms")
    row = next(a for a in alarms["alarms"] if a["name"] == ALARM)
    assert row["active"] and row["unacknowledged"] and row["priority"] == "critical"
    _, page = await get_json(low_superheat.url + "/api/v1/events?since=0&limit=1")
    assert len(page["events"]) == 1 and page["next"] == page["events"][0]["id"]
    _, rest = await get_json(low_superheat.url + f"/api/v1/events?since={page['next']}")
    assert all(e["id"] > page["next"] for e in rest["events"])


async def test_alarm_json_keeps_the_activation_with_units_and_rfc3339_times(low_superheat):
    """A standing alarm: time in (RFC 3339 UTC), value and limit at activation in SI and in
    the limit's unit, each with its unit string; the live value apart."""
    _, alarms = await get_json(low_superheat.url + "/api/v1/alarms")
    row = next(a for a in alarms["alarms"] if a["name"] == ALARM)
    act = row["activation"]
    assert act["time"].endswith("Z") and row["since"].endswith("Z")
    assert act["limit"] == {"value": 5.0, "unit": "K", "display": {"value": 5.0, "unit": "K"}}
    assert act["value"]["unit"] == "K" and act["value"]["value"] < 5.0
    assert act["message"] == row["message"] == "Superheat at the drum outlet is low"
    assert row["live"]["value"]["unit"] == "K" and row["acknowledged"] is None
    _, page = await get_json(low_superheat.url + f"/api/v1/events?alarm={ALARM}")
    raised = next(e for e in page["events"] if e["kind"] == "raised")
    assert raised["time"].endswith("Z") and raised["limit"]["display"]["unit"] == "K"


async def test_events_bad_query_is_400(low_superheat):
    """A non-numeric since is a JSON 400."""
    status, body = await get_json(low_superheat.url + "/api/v1/events?since=yesterday")
    assert status == 400 and body["error"] == "bad_query"


async def test_health_and_readiness(low_superheat):
    """healthz and readyz answer 200 once the source has delivered."""
    assert (await get_json(low_superheat.url + "/healthz"))[0] == 200
    status, body = await get_json(low_superheat.url + "/readyz")
    assert status == 200 and all(body["checks"].values())


async def test_writes_disabled_without_token(tmp_path, monkeypatch):
    """Without a configured token every POST is 403 with a clear error, even a good one."""
    monkeypatch.delenv("STEAMEDGE_TEST_TOKEN", raising=False)
    async with modbus_server(holding=registers()) as plc:
        config = write_config(tmp_path / "edge.yaml", plc.port, token_env=None)
        async with running_monitor(config) as monitor:
            status, body = await post(monitor.url + URL + "/ack", {"user": "ops"}, auth())
            assert status == 403 and body["error"] == "writes_disabled"
            assert "token" in body["detail"]


async def test_not_ready_before_a_source_delivers(tmp_path, token_env):
    """readyz is 503 naming the missing check while no source has delivered."""
    async with modbus_server(holding=registers()) as plc:
        port = plc.port
    config = write_config(tmp_path / "edge.yaml", port)  # nothing listens there now
    async with running_monitor(config) as monitor:
        status, body = await get_json(monitor.url + "/readyz")
        assert status == 503 and body["checks"]["source"] is False


async def test_non_loopback_without_token_is_refused(tmp_path, monkeypatch):
    """Listening on 0.0.0.0 without a token is refused at start-up."""
    monkeypatch.delenv("STEAMEDGE_TEST_TOKEN", raising=False)
    config = write_config(tmp_path / "edge.yaml", 1, listen="0.0.0.0:0", token_env=None)
    with pytest.raises(ConfigError, match=r"http\.listen: .*token"):
        async with running_monitor(config):
            pass


async def test_every_route_is_in_the_openapi_document(low_superheat):
    """Each route the app serves is described in openapi.yaml (served at its URL)."""
    async with (
        aiohttp.ClientSession() as s,
        s.get(low_superheat.url + "/api/v1/openapi.yaml") as r,
    ):
        assert r.status == 200
        doc = yaml.safe_load(await r.text())
    from edge.web.app import build_app

    app = build_app(low_superheat)
    served = {
        (res.canonical, route.method.lower())
        for res in app.router.resources()
        for route in res
        if route.method != "HEAD"
    }
    documented = {(path, m) for path, ops in doc["paths"].items() for m in ops}
    assert served == documented, (served - documented, documented - served)
    assert len(served) >= 14


async def test_every_reference_in_the_openapi_document_resolves():
    """Each $ref of openapi.yaml points at a component the document defines."""
    from edge.web.app import OPENAPI_PATH

    doc = yaml.safe_load(OPENAPI_PATH.read_text())
    refs: list[str] = []

    def walk(node) -> None:
        if isinstance(node, dict):
            refs.extend(v for k, v in node.items() if k == "$ref")
            for v in node.values():
                walk(v)
        elif isinstance(node, list):
            for v in node:
                walk(v)

    walk(doc)
    assert refs
    for ref in refs:
        target = doc
        for part in ref.removeprefix("#/").split("/"):
            target = target[part]  # KeyError names a dangling reference
        assert isinstance(target, dict), ref


async def test_alarm_list_carries_the_alarm_system_health(low_superheat):
    """GET /api/v1/alarms reports the journal's health figures beside the alarms."""
    status, body = await get_json(low_superheat.url + "/api/v1/alarms")
    assert status == 200
    health = body["health"]
    # one alarm raised so far: no flood (ISA-18.2 / EEMUA 191: more than 10 in 10 minutes)
    assert health["rate_10min"] == 1 and health["rate_hour"] == 1
    assert health["flood"] is False and health["flood_threshold_10min"] == 10
    assert health["chattering"] == [] and health["stale"] == []
    assert health["top"] == [{"alarm": ALARM, "count": 1}]


async def test_alarm_messages_are_rendered_not_templates(low_superheat):
    """GET /api/v1/alarms gives each message as an operator reads it, never a template."""
    _, body = await get_json(low_superheat.url + "/api/v1/alarms")
    messages = {a["name"]: a["message"] for a in body["alarms"]}
    assert messages["drum-quality"] == "Point drum data quality: good"
    assert messages[ALARM] == "Superheat at the drum outlet is low"
    assert not any("{" in m for m in messages.values()), messages


async def test_any_write_to_any_path_without_token_is_401(low_superheat):
    """An unknown path or method answers 401, not 404/405: nothing is learnt unauthenticated."""
    async with aiohttp.ClientSession() as s:
        for method, path in (
            ("POST", "/api/v1/no-such-route"),
            ("PUT", "/api/v1/alarms"),
            ("DELETE", URL + "/ack"),
        ):
            async with s.request(method, low_superheat.url + path) as r:
                assert r.status == 401, (method, path)
                assert r.headers["WWW-Authenticate"].startswith("Bearer")


async def test_oversized_chunked_body_is_413(low_superheat):
    """A body sent without Content-Length (chunked) is cut off at http.max_body too."""

    async def chunks():
        yield b'{"user": "ops", "comment": "'
        for _ in range(20):
            yield b"x" * 4096
        yield b'"}'

    async with (
        aiohttp.ClientSession() as s,
        s.post(low_superheat.url + URL + "/ack", data=chunks(), headers=auth()) as r,
    ):
        assert r.status == 413
        assert (await r.json())["error"] == "body_too_large"
    assert low_superheat.alarm_states[ALARM].unacknowledged
