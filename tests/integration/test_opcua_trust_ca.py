"""OPC UA trust folder holding a certificate authority rather than the server's own
certificate: a server certificate issued by a trusted CA is accepted, one from another CA
is refused. Real asyncua server on 127.0.0.1 with a CA-issued certificate."""

from __future__ import annotations

import socket
from pathlib import Path
from typing import Any

import pytest
import pytest_asyncio
from asyncua.crypto import cert_gen
from cryptography import x509
from cryptography.hazmat.primitives import serialization
from cryptography.x509.oid import ExtendedKeyUsageOID

from edge import config as cfg
from edge.cli import main as cli
from edge.sources.opcua import OpcUaSource
from tests.integration.opcua_server import SERVER_URI, PlantServer, running

pytestmark = pytest.mark.asyncio(loop_scope="module")

URI = "urn:riverside-laundry:steam-edge"


def make_ca(folder: Path, name: str) -> tuple[x509.Certificate, Any]:
    """A CA key and certificate; the certificate is written to ``folder/<name>.pem``."""
    key = cert_gen.generate_private_key()
    cert = cert_gen.generate_self_signed_app_certificate(key, name, {}, [], extended=[])
    folder.mkdir(parents=True, exist_ok=True)
    (folder / f"{name}.pem").write_bytes(cert.public_bytes(serialization.Encoding.PEM))
    return cert, key


def issue_server_certificate(cert_dir: Path, ca: x509.Certificate, ca_key: Any) -> None:
    """Server key and a certificate issued by ``ca``, where the test server looks for them
    (it keeps a valid pair it finds there instead of making a self-signed one)."""
    cert_dir.mkdir(parents=True, exist_ok=True)
    key = cert_gen.generate_private_key()
    names = [x509.UniformResourceIdentifier(SERVER_URI), x509.DNSName(socket.gethostname())]
    csr = cert_gen.generate_app_certificate_signing_request(
        key, "steam-edge test server", {}, names, [ExtendedKeyUsageOID.SERVER_AUTH]
    )
    cert = cert_gen.sign_certificate_request(csr, ca, ca_key, days=30)
    (cert_dir / "server_key.pem").write_bytes(cert_gen.dump_private_key_as_pem(key))
    (cert_dir / "server_cert.der").write_bytes(cert.public_bytes(serialization.Encoding.DER))


@pytest.fixture(scope="module")
def folders(tmp_path_factory):
    root = tmp_path_factory.mktemp("ca")
    ca, ca_key = make_ca(root / "trusted", "riverside-plant-ca")
    make_ca(root / "other", "some-other-ca")
    issue_server_certificate(root / "server", ca, ca_key)
    key, cert = root / "client_key.pem", root / "client_cert.der"
    argv = ["make-cert", "--uri", URI, "--key", str(key), "--cert", str(cert)]
    assert cli(argv) == 0
    return root, key, cert


@pytest_asyncio.fixture(scope="module", loop_scope="module")
async def server(folders):
    root, _, _ = folders
    srv = PlantServer(cert_dir=root / "server")
    await srv.start()
    await srv.write("Boiler.DrumPressure", 6.75)
    yield srv
    await srv.stop()


def source(server: PlantServer, folders: tuple[Path, Path, Path], trust: str) -> OpcUaSource:
    root, key, cert = folders
    return OpcUaSource(
        cfg.OpcUaSource.model_validate(
            {
                "name": "turbine-opcua",
                "protocol": "opcua",
                "endpoint": server.url,
                "interval": "200 ms",
                "backoff_max": "1 s",
                "application_uri": URI,
                "security": {
                    "policy": "Basic256Sha256",
                    "mode": "SignAndEncrypt",
                    "certificate": str(cert),
                    "private_key": str(key),
                    "trust_dir": str(root / trust),
                },
                "tags": [
                    {
                        "name": "hp_p",
                        "node": server.node_id("Boiler.DrumPressure"),
                        "unit": "bar",
                        "reference": "gauge",
                    }
                ],
            }
        )
    )


async def test_server_certificate_is_issued_by_the_ca(server, folders):
    """The test server really presents a certificate issued by the CA, not a self-signed one."""
    assert server.certificate is not None
    cert = x509.load_der_x509_certificate(server.certificate.read_bytes())
    assert cert.issuer.rfc4514_string() == "CN=riverside-plant-ca"


async def test_trust_dir_holding_the_issuing_ca_connects(server, folders):
    """A trust folder with only the CA certificate accepts the server it issued."""
    src = source(server, folders, "trusted")
    async with running(src) as rec:
        s = await rec.wait_for(lambda s: s.quality.good, since=0)
    assert s.value == pytest.approx(6.75e5)  # 6.75 bar in Pa; common practice


async def test_trust_dir_with_another_ca_is_refused(server, folders):
    """A trust folder with an unrelated CA refuses the server, naming the folder."""
    src = source(server, folders, "other")
    async with running(src) as rec:
        await rec.wait_for(lambda s: s.quality.reason in ("comm_loss", "config"), since=0)
        for _ in range(50):
            if src.health.errors.get("security"):
                break
            await rec.wait_for(lambda s: True, timeout=1)
        assert not any(s.quality.good for s in rec.samples)
    assert "is not trusted by any certificate in trust_dir" in src.health.last_error
