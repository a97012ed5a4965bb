"""steam-edge make-cert: an OPC UA client key and self-signed certificate for commissioning."""

from __future__ import annotations

import contextlib
import datetime as dt
import io
import shutil
import stat
import subprocess

import pytest
from cryptography import x509
from cryptography.hazmat.primitives import serialization
from cryptography.x509.oid import ExtendedKeyUsageOID

from edge.cli import main as cli

URI = "urn:riverside-laundry:steam-edge"


@pytest.fixture(scope="module")
def made(tmp_path_factory):
    """Run the command once: (key path, certificate path, what it printed)."""
    d = tmp_path_factory.mktemp("cert")
    key, cert = d / "client_key.pem", d / "client_cert.der"
    argv = ["make-cert", "--uri", URI, "--key", str(key), "--cert", str(cert)]
    argv += ["--host", "edge-01", "--host", "192.0.2.7", "--days", "365"]
    out = io.StringIO()
    with contextlib.redirect_stdout(out):
        assert cli(argv) == 0
    return key, cert, out.getvalue()


def test_certificate_names_the_application_uri_and_hosts(made):
    """The subject alternative names carry the application URI, host name and address."""
    _, cert_path, _ = made
    cert = x509.load_der_x509_certificate(cert_path.read_bytes())
    san = cert.extensions.get_extension_for_class(x509.SubjectAlternativeName).value
    assert san.get_values_for_type(x509.UniformResourceIdentifier) == [URI]
    assert san.get_values_for_type(x509.DNSName) == ["edge-01"]
    assert [str(a) for a in san.get_values_for_type(x509.IPAddress)] == ["192.0.2.7"]


def test_certificate_has_the_usages_of_an_opc_ua_client(made):
    """Digital signature and key encipherment, client authentication (OPC UA Part 6, from
    memory), self-signed, valid for the days asked."""
    _, cert_path, _ = made
    cert = x509.load_der_x509_certificate(cert_path.read_bytes())
    usage = cert.extensions.get_extension_for_class(x509.KeyUsage).value
    assert usage.digital_signature and usage.key_encipherment
    eku = cert.extensions.get_extension_for_class(x509.ExtendedKeyUsage).value
    assert ExtendedKeyUsageOID.CLIENT_AUTH in list(eku)
    assert cert.issuer == cert.subject
    days = cert.not_valid_after_utc - cert.not_valid_before_utc
    assert abs(days - dt.timedelta(days=365)) <= dt.timedelta(days=1)


def test_private_key_is_owner_only_and_matches_the_certificate(made):
    """The PEM key file is mode 600 and holds the certificate's key pair."""
    key_path, cert_path, _ = made
    assert stat.S_IMODE(key_path.stat().st_mode) == 0o600
    key = serialization.load_pem_private_key(key_path.read_bytes(), password=None)
    cert = x509.load_der_x509_certificate(cert_path.read_bytes())
    assert key.public_key().public_numbers() == cert.public_key().public_numbers()  # type: ignore[union-attr]


def test_printed_fingerprint_matches_openssl(made):
    """The SHA-256 printed is the one `openssl x509 -fingerprint -sha256` gives."""
    _, cert_path, out = made
    openssl = shutil.which("openssl")
    assert openssl, "openssl is needed for the fingerprint cross-check"
    run = subprocess.run(
        [
            openssl,
            "x509",
            "-inform",
            "der",
            "-in",
            str(cert_path),
            "-noout",
            "-fingerprint",
            "-sha256",
        ],
        capture_output=True,
        text=True,
        check=True,
    )
    reference = run.stdout.strip().split("=", 1)[1]  # OpenSSL 3.0
    printed = next(line for line in out.splitlines() if line.startswith("SHA-256:"))
    assert printed.split()[-1] == reference


def test_a_uri_without_a_scheme_is_one_error_line(tmp_path, capsys):
    """--uri that is no URI: exit 2 and one line saying what is expected; no files made."""
    key, cert = tmp_path / "k.pem", tmp_path / "c.der"
    rc = cli(["make-cert", "--uri", "steam-edge", "--key", str(key), "--cert", str(cert)])
    err = capsys.readouterr().err
    assert rc == 2
    assert err.splitlines() == [
        "error: --uri: expected a URI such as urn:site:steam-edge, got 'steam-edge'"
    ]
    assert not key.exists() and not cert.exists()
