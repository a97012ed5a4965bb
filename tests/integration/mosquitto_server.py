"""A real MQTT broker (Debian mosquitto) for tests: a generated config on a free 127.0.0.1
port, a password file, optionally TLS with a CA and server certificate made here with
``cryptography``; it can be killed and started again on the same port. Not collected."""

from __future__ import annotations

import base64
import datetime as dt
import hashlib
import ipaddress
import os
import shutil
import signal
import socket
import subprocess
import time
from dataclasses import dataclass
from pathlib import Path

import pytest

USERS = {"edge": "edge-secret-4711", "watcher": "watcher-secret-0815"}  # invented, tests only


def binary() -> str:
    """mosquitto; in CI (CI=true) a missing one fails the test, never skips."""
    path = shutil.which("mosquitto") or ("/usr/sbin/mosquitto" if os.path.exists(
        "/usr/sbin/mosquitto") else None)  # fmt: skip
    if path is None:
        if os.environ.get("CI") == "true":
            pytest.fail("mosquitto is required in CI (scripts/setup installs it)")
        pytest.skip("mosquitto not installed")
    return path


def free_port() -> int:
    with socket.socket() as s:
        s.bind(("127.0.0.1", 0))
        return s.getsockname()[1]


def write_passwords(path: Path, users: dict[str, str]) -> None:
    """A mosquitto password file: with mosquitto_passwd when present, else written in its
    format (``user:$7$<iterations>$<salt b64>$<PBKDF2-SHA512 b64>``, mosquitto 2.0)."""
    tool = shutil.which("mosquitto_passwd")
    if tool:
        path.write_text("")
        for user, password in users.items():
            subprocess.run([tool, "-b", str(path), user, password], check=True, timeout=10)
        return
    lines = []
    for user, password in users.items():
        salt = os.urandom(12)
        digest = hashlib.pbkdf2_hmac("sha512", password.encode(), salt, 101)
        b64 = base64.b64encode
        lines.append(f"{user}:$7$101${b64(salt).decode()}${b64(digest).decode()}")
    path.write_text("\n".join(lines) + "\n")


@dataclass
class Pki:
    ca: Path  # CA certificate (PEM) the broker's certificate chains to
    cert: Path  # server certificate for 127.0.0.1 / localhost
    key: Path


def make_pki(folder: Path, name: str = "test") -> Pki:
    """A CA and a server certificate it issued (SAN 127.0.0.1 and localhost), in PEM."""
    from cryptography import x509
    from cryptography.hazmat.primitives import hashes, serialization
    from cryptography.hazmat.primitives.asymmetric import ec
    from cryptography.x509.oid import ExtendedKeyUsageOID, NameOID

    now = dt.datetime.now(dt.UTC)
    ca_key = ec.generate_private_key(ec.SECP256R1())
    ca_name = x509.Name([x509.NameAttribute(NameOID.COMMON_NAME, f"{name} test CA")])
    ca = (
        x509.CertificateBuilder()
        .subject_name(ca_name)
        .issuer_name(ca_name)
        .public_key(ca_key.public_key())
        .serial_number(x509.random_serial_number())
        .not_valid_before(now - dt.timedelta(minutes=5))
        .not_valid_after(now + dt.timedelta(days=2))
        .add_extension(x509.BasicConstraints(ca=True, path_length=0), critical=True)
        .add_extension(
            x509.KeyUsage(True, False, False, False, False, True, True, False, False), True
        )
        .add_extension(x509.SubjectKeyIdentifier.from_public_key(ca_key.public_key()), False)
        .sign(ca_key, hashes.SHA256())
    )
    key = ec.generate_private_key(ec.SECP256R1())
    cert = (
        x509.CertificateBuilder()
        .subject_name(x509.Name([x509.NameAttribute(NameOID.COMMON_NAME, "localhost")]))
        .issuer_name(ca_name)
        .public_key(key.public_key())
        .serial_number(x509.random_serial_number())
        .not_valid_before(now - dt.timedelta(minutes=5))
        .not_valid_after(now + dt.timedelta(days=2))
        .add_extension(
            x509.SubjectAlternativeName(
                [x509.DNSName("localhost"), x509.IPAddress(ipaddress.ip_address("127.0.0.1"))]
            ),
            False,
        )
        .add_extension(x509.ExtendedKeyUsage([ExtendedKeyUsageOID.SERVER_AUTH]), False)
        .add_extension(
            x509.AuthorityKeyIdentifier.from_issuer_public_key(ca_key.public_key()), False
        )
        .sign(ca_key, hashes.SHA256())
    )
    folder.mkdir(parents=True, exist_ok=True)
    pki = Pki(
        folder / f"{name}-ca.pem", folder / f"{name}-server.pem", folder / f"{name}-server.key"
    )
    pki.ca.write_bytes(ca.public_bytes(serialization.Encoding.PEM))
    pki.cert.write_bytes(cert.public_bytes(serialization.Encoding.PEM))
    pki.key.write_bytes(
        key.private_bytes(
            serialization.Encoding.PEM,
            serialization.PrivateFormat.PKCS8,
            serialization.NoEncryption(),
        )
    )
    return pki


class Broker:
    """One mosquitto on 127.0.0.1:``port``; ``start``/``kill`` may be repeated."""

    def __init__(self, work: Path, *, tls: Pki | None = None, persistent: bool = False) -> None:
        self.exe = binary()
        self.work = work
        self.port = free_port()
        self.tls = tls
        self.proc: subprocess.Popen[bytes] | None = None
        work.mkdir(parents=True, exist_ok=True)
        self.passwords = work / "passwd"
        write_passwords(self.passwords, USERS)
        self.passwords.chmod(0o600)
        lines = [
            f"listener {self.port} 127.0.0.1",
            "allow_anonymous false",
            f"password_file {self.passwords}",
            "persistence true" if persistent else "persistence false",
            "log_dest stderr",
            "log_type error",
            "log_type warning",
            "log_type notice",
            "max_queued_messages 100000",
        ]
        if persistent:  # subscribers' sessions survive a kill (saved every second)
            lines += [f"persistence_location {work}/", "autosave_interval 1"]
        if os.geteuid() == 0:
            lines.append("user root")  # mosquitto drops to user 'mosquitto' otherwise
        if tls is not None:
            lines += [f"cafile {tls.ca}", f"certfile {tls.cert}", f"keyfile {tls.key}"]
            lines.append("tls_version tlsv1.2")
        self.config = work / "mosquitto.conf"
        self.config.write_text("\n".join(lines) + "\n")
        self.log = work / "mosquitto.log"

    @property
    def url(self) -> str:
        return f"{'mqtts' if self.tls else 'mqtt'}://127.0.0.1:{self.port}"

    def start(self) -> None:
        with open(self.log, "ab") as log:
            self.proc = subprocess.Popen(
                [self.exe, "-c", str(self.config)], stdout=subprocess.DEVNULL, stderr=log
            )
        deadline = time.monotonic() + 10.0
        while True:
            with socket.socket() as s:
                s.settimeout(0.2)
                if s.connect_ex(("127.0.0.1", self.port)) == 0:
                    return
            if self.proc.poll() is not None or time.monotonic() > deadline:
                text = self.log.read_text(errors="replace")[-2000:]
                self.kill()
                pytest.fail(f"mosquitto did not start:\n{text}")
            time.sleep(0.02)

    def kill(self) -> None:
        """SIGKILL: the broker dies without a goodbye (wills it holds are lost with it)."""
        proc, self.proc = self.proc, None
        if proc is not None and proc.poll() is None:
            proc.send_signal(signal.SIGKILL)
            proc.wait(10)

    def __enter__(self) -> Broker:
        self.start()
        return self

    def __exit__(self, *exc: object) -> None:
        self.kill()
