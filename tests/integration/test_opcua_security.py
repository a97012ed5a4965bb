"""OPC UA security against a real asyncua server on 127.0.0.1: encrypted sessions with user
name and password, the server certificate pinned or trusted, refusals with clear errors,
and no secret in any log line."""

from __future__ import annotations

import asyncio
import io
import logging
import os
import secrets
import shutil
import subprocess
import sys
from pathlib import Path
from typing import Any

import pytest
import pytest_asyncio
import structlog

from edge import config as cfg
from edge.cli import main as cli
from edge.config import security_warnings
from edge.logs import configure
from edge.sources.opcua import OpcUaSource
from tests.integration.opcua_server import (
    PlantServer,
    free_port,
    make_server_certificate,
    running,
)

pytestmark = [pytest.mark.asyncio(loop_scope="module"), pytest.mark.slow]

USER = "monitor"
PASSWORD_ENV = "STEAMEDGE_TEST_OPCUA_PASSWORD"
URI = "urn:riverside-laundry:steam-edge"


@pytest.fixture(scope="module")
def password():
    value = "pw-" + secrets.token_hex(8)
    os.environ[PASSWORD_ENV] = value
    yield value
    os.environ.pop(PASSWORD_ENV, None)


@pytest.fixture(scope="module")
def client_files(tmp_path_factory):
    """Client key and certificate made by the real ``steam-edge make-cert`` command."""
    d = tmp_path_factory.mktemp("client")
    key, cert = d / "client_key.pem", d / "client_cert.der"
    rc = cli(
        ["make-cert", "--uri", URI, "--key", str(key), "--cert", str(cert), "--host", "127.0.0.1"]
    )
    assert rc == 0
    return key, cert


@pytest_asyncio.fixture(scope="module", loop_scope="module")
async def server(tmp_path_factory, password):
    srv = PlantServer(cert_dir=tmp_path_factory.mktemp("server"), users={USER: password})
    await srv.start()
    await srv.write("Boiler.DrumPressure", 7.25)
    yield srv
    await srv.stop()


def secure_source(
    server: PlantServer, client_files: tuple[Path, Path], **security: Any
) -> OpcUaSource:
    key, cert = client_files
    sec = {
        "policy": "Basic256Sha256",
        "mode": "SignAndEncrypt",
        "certificate": str(cert),
        "private_key": str(key),
        "server_certificate": str(server.certificate),
    }
    sec.update(security)
    sec = {k: v for k, v in sec.items() if v is not None}
    extra = {"username": USER, "password_env": PASSWORD_ENV}
    extra.update(security.pop("_user", {}))
    config = cfg.OpcUaSource.model_validate(
        {
            "name": "turbine-opcua",
            "protocol": "opcua",
            "endpoint": server.url,
            "interval": "200 ms",
            "backoff_max": "1 s",
            "application_uri": URI,
            "security": {k: v for k, v in sec.items() if not k.startswith("_")},
            "tags": [
                {
                    "name": "hp_p",
                    "node": server.node_id("Boiler.DrumPressure"),
                    "unit": "bar",
                    "reference": "gauge",
                }
            ],
            **extra,
        }
    )
    return OpcUaSource(config)


async def refused(src: OpcUaSource, kind: str = "security") -> str:
    """Run the source until it has counted a refusal of ``kind``; no good sample may arrive."""
    async with running(src) as rec:
        await rec.wait_for(lambda s: s.quality.reason in ("comm_loss", "config"), since=0)
        for _ in range(50):
            if src.health.errors.get(kind):
                break
            await rec.wait_for(lambda s: True, timeout=1)
        assert not any(s.quality.good for s in rec.samples)
    assert src.health.errors.get(kind, 0) >= 1, src.health.errors
    return src.health.last_error


@pytest.mark.parametrize(
    ("policy", "mode"),
    [
        ("Basic256Sha256", "SignAndEncrypt"),
        ("Aes128_Sha256_RsaOaep", "SignAndEncrypt"),
        ("Aes256_Sha256_RsaPss", "SignAndEncrypt"),
        ("Basic256Sha256", "Sign"),
        ("Aes128_Sha256_RsaOaep", "Sign"),
        ("Aes256_Sha256_RsaPss", "Sign"),
    ],
)
async def test_secured_session_with_password_delivers_values(server, client_files, policy, mode):
    """Each policy and mode with user name and password, server pinned: values flow."""
    src = secure_source(server, client_files, policy=policy, mode=mode)
    async with running(src) as rec:
        s = await rec.wait_for(lambda s: s.quality.good, since=0)
    assert s.value == pytest.approx(7.25e5)  # 7.25 bar in Pa; common practice
    assert src.health.errors == {}


async def test_wrong_pinned_server_certificate_is_refused(server, client_files, tmp_path):
    """A pinned certificate that is not the server's refuses the connection, saying so."""
    _, other = await make_server_certificate(tmp_path / "other")
    src = secure_source(server, client_files, server_certificate=str(other))
    message = await refused(src)
    assert "does not match the pinned" in message
    assert str(other) in message


async def test_trust_dir_holding_the_server_certificate_connects(server, client_files, tmp_path):
    """A trust folder holding the server's certificate lets the session through."""
    trust = tmp_path / "trusted"
    trust.mkdir()
    assert server.certificate is not None
    shutil.copy(server.certificate, trust / "plant-server.der")
    src = secure_source(server, client_files, server_certificate=None, trust_dir=str(trust))
    async with running(src) as rec:
        await rec.wait_for(lambda s: s.quality.good, since=0)


async def test_trust_dir_without_the_server_certificate_is_refused(server, client_files, tmp_path):
    """A trust folder that does not hold or issue the server's certificate refuses it."""
    _, other = await make_server_certificate(tmp_path / "other")
    src = secure_source(server, client_files, server_certificate=None, trust_dir=str(other.parent))
    message = await refused(src)
    assert "not trusted by any certificate in trust_dir" in message


async def test_wrong_password_is_refused_with_a_clear_error(server, client_files, monkeypatch):
    """A wrong password is refused: the error names the user token refusal, not a traceback."""
    monkeypatch.setenv("STEAMEDGE_TEST_WRONG_PASSWORD", "not-the-" + secrets.token_hex(4))
    src = secure_source(
        server, client_files, _user={"password_env": "STEAMEDGE_TEST_WRONG_PASSWORD"}
    )
    message = await refused(src)
    assert (
        message == "turbine-opcua: server refused the user name or password (BadUserAccessDenied)"
    )


async def test_password_file_with_a_trailing_newline_logs_in(
    server, client_files, password, tmp_path
):
    """password_file (as an editor saves it, newline at the end) opens the session."""
    secret_file = tmp_path / "opcua-password"
    secret_file.write_text(password + "\n")
    secret_file.chmod(0o600)
    src = secure_source(
        server, client_files, _user={"password_env": None, "password_file": str(secret_file)}
    )
    async with running(src) as rec:
        s = await rec.wait_for(lambda s: s.quality.good, since=0)
    assert s.value == pytest.approx(7.25e5)  # 7.25 bar in Pa; common practice


async def test_anonymous_session_refused_says_a_user_is_needed(server, client_files):
    """A server that wants a user, asked for an anonymous session: the error says so."""
    src = secure_source(server, client_files, _user={"username": None, "password_env": None})
    message = await refused(src)
    assert message == (
        "turbine-opcua: server refused an anonymous session (BadIdentityTokenRejected); "
        "give a username and password_env or password_file"
    )


async def test_missing_password_variable_is_bad_config(server, client_files, monkeypatch):
    """A password_env that is not set: tags bad/config, counted as a config error."""
    monkeypatch.delenv("STEAMEDGE_TEST_UNSET_PASSWORD", raising=False)
    src = secure_source(
        server, client_files, _user={"password_env": "STEAMEDGE_TEST_UNSET_PASSWORD"}
    )
    async with running(src) as rec:
        s = await rec.wait_for(lambda s: s.quality.reason == "config", since=0)
    assert "STEAMEDGE_TEST_UNSET_PASSWORD is not set" in src.health.last_error
    assert s.quality.name == "bad"


async def test_no_secret_appears_in_any_log_line(server, client_files, password, caplog):
    """Debug logs (ours and asyncua's, tracebacks included) of an encrypted session, a
    session with policy None and a refused one hold no password."""
    wrong = "wrong-" + secrets.token_hex(6)
    os.environ["STEAMEDGE_TEST_WRONG_PASSWORD2"] = wrong
    out = io.StringIO()
    configure(fmt="json", level="debug", stream=out)
    caplog.set_level(logging.DEBUG)
    plain = {"policy": "None", "mode": "None", "certificate": None, "private_key": None}
    try:
        for security in ({}, {**plain, "server_certificate": None}):
            good = secure_source(server, client_files, **security)
            async with running(good) as rec:
                await rec.wait_for(lambda s: s.quality.good, since=0)
        bad = secure_source(
            server, client_files, _user={"password_env": "STEAMEDGE_TEST_WRONG_PASSWORD2"}
        )
        await refused(bad)
    finally:
        structlog.reset_defaults()
        os.environ.pop("STEAMEDGE_TEST_WRONG_PASSWORD2", None)
    lines = out.getvalue().splitlines() + caplog.text.splitlines()
    assert sum("source_up" in line for line in lines) == 2  # the capture did see our logs
    assert any("ActivateSession" in line for line in lines)  # and asyncua's debug lines
    assert any("BadUserAccessDenied" in line for line in lines)
    for secret in (password, wrong):
        assert not [line for line in lines if secret in line]


async def test_policy_none_off_this_machine_warns():
    """Policy None towards another host gives a start-up warning; towards loopback none."""

    def src(endpoint: str, **security: str) -> cfg.OpcUaSource:
        return cfg.OpcUaSource.model_validate(
            {
                "name": "turbine-opcua",
                "protocol": "opcua",
                "endpoint": endpoint,
                "security": security,
                "tags": [],
            }
        )

    assert security_warnings(src("opc.tcp://127.0.0.1:4840")) == []
    assert security_warnings(src("opc.tcp://localhost:4840")) == []
    assert security_warnings(src("opc.tcp://[::1]:4840")) == []
    warnings = security_warnings(src("opc.tcp://10.20.0.5:4840/plc"))
    assert len(warnings) == 1 and "10.20.0.5" in warnings[0] and "policy None" in warnings[0]
    secured = src(
        "opc.tcp://10.20.0.5:4840",
        policy="Basic256Sha256",
        mode="SignAndEncrypt",
        certificate="c.der",
        private_key="k.pem",
        server_certificate="s.der",
    )
    assert security_warnings(secured) == []


async def test_make_cert_refuses_to_overwrite_without_force(client_files, capsys):
    """make-cert leaves existing files alone unless --force is given."""
    key, cert = client_files
    before = cert.read_bytes()
    assert cli(["make-cert", "--uri", URI, "--key", str(key), "--cert", str(cert)]) == 2
    assert cert.read_bytes() == before
    assert "exists; pass --force" in capsys.readouterr().err


async def test_probe_reads_over_an_encrypted_session(server, client_files, password, capsys):
    """probe with --security, client files, pinned server and --password-env reads a node."""
    key, cert = client_files
    argv = [
        "probe",
        server.url,
        "--node",
        server.node_id("Boiler.DrumPressure"),
        "--security",
        "Aes256_Sha256_RsaPss,SignAndEncrypt",
        "--certificate",
        str(cert),
        "--private-key",
        str(key),
        "--server-certificate",
        str(server.certificate),
        "--username",
        USER,
        "--password-env",
        PASSWORD_ENV,
    ]
    rc = await asyncio.to_thread(cli, argv)
    out = capsys.readouterr().out
    assert rc == 0
    assert "secure channel: Aes256_Sha256_RsaPss SignAndEncrypt" in out
    assert "value         7.25" in out
    assert password not in out


async def test_probe_against_a_wrong_pin_says_why(server, client_files, tmp_path, capsys):
    """probe with a pinned certificate that is not the server's: one line naming the pin."""
    key, cert = client_files
    _, other = await make_server_certificate(tmp_path / "other")
    argv = [
        "probe",
        server.url,
        "--node",
        "i=2259",
        "--security",
        "Basic256Sha256",
        "--certificate",
        str(cert),
        "--private-key",
        str(key),
        "--server-certificate",
        str(other),
    ]
    rc = await asyncio.to_thread(cli, argv)
    err = capsys.readouterr().err.strip()
    assert rc == 1
    assert err.startswith("error: probe: server certificate does not match the pinned one")
    assert len(err.splitlines()) == 1


async def test_source_logs_the_policy_none_warning_when_it_starts():
    """A source with policy None towards another address logs the warning as it starts."""
    out = io.StringIO()
    configure(fmt="json", level="info", stream=out)
    config = cfg.OpcUaSource.model_validate(
        {
            "name": "turbine-opcua",
            "protocol": "opcua",
            # 127.0.0.2 is this machine too, but not one of the names the rule lets pass
            "endpoint": f"opc.tcp://127.0.0.2:{free_port()}/plc",
            "interval": "200 ms",
            "tags": [{"name": "hp_t", "node": "ns=2;s=HP.T", "unit": "degC"}],
        }
    )
    try:
        async with running(OpcUaSource(config)) as rec:
            await rec.wait_for(lambda s: s.quality.reason == "comm_loss", since=0)
    finally:
        structlog.reset_defaults()
    lines = [line for line in out.getvalue().splitlines() if "source_security" in line]
    assert len(lines) == 1
    assert "policy None towards 127.0.0.2" in lines[0]


async def test_probe_with_a_wrong_password_is_one_line(server, client_files):
    """`steam-edge probe` with a wrong password: exit 1 and exactly one line on stderr naming
    the refusal (asyncua's own warnings about the fault stay out of the output)."""
    key, cert = client_files
    env = {**os.environ, "STEAMEDGE_TEST_PROBE_WRONG": "not-the-" + secrets.token_hex(4)}
    argv = [
        str(Path(sys.executable).parent / "steam-edge"),
        "probe",
        server.url,
        "--node",
        server.node_id("Boiler.DrumPressure"),
        "--security",
        "Basic256Sha256,SignAndEncrypt",
        "--certificate",
        str(cert),
        "--private-key",
        str(key),
        "--server-certificate",
        str(server.certificate),
        "--username",
        USER,
        "--password-env",
        "STEAMEDGE_TEST_PROBE_WRONG",
    ]
    run = await asyncio.to_thread(
        subprocess.run, argv, capture_output=True, text=True, env=env, timeout=60
    )
    assert run.returncode == 1
    assert run.stderr.splitlines() == [
        "error: probe: server refused the user name or password (BadUserAccessDenied)"
    ]
    assert run.stdout == ""
