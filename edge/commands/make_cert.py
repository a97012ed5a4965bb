"""steam-edge make-cert: an OPC UA client private key and self-signed certificate.

The certificate carries the application URI (which the server checks against the session's
ApplicationDescription) and this machine's host name as subject alternative names, with the
key usages OPC UA asks of an application instance certificate. Copy the certificate into the
server's trusted folder; point ``security.certificate`` / ``security.private_key`` at the files
and set ``application_uri`` to the same URI.
"""

from __future__ import annotations

import argparse
import ipaddress
import os
import socket
from pathlib import Path

from asyncua.crypto import cert_gen
from cryptography import x509
from cryptography.hazmat.primitives import serialization
from cryptography.x509.oid import ExtendedKeyUsageOID

from edge.errors import ConfigError
from edge.sources.opcua_security import fingerprint


def add_arguments(parser: argparse.ArgumentParser) -> None:
    parser.add_argument(
        "--uri",
        "--application-uri",
        dest="uri",
        required=True,
        help="application URI, e.g. urn:riverside-laundry:steam-edge",
    )
    parser.add_argument("--key", default="client_key.pem", help="private key file (PEM)")
    parser.add_argument("--cert", default="client_cert.der", help="certificate file (DER)")
    parser.add_argument(
        "--host",
        action="append",
        dest="hosts",
        help="host name or IP address to name in the certificate (repeatable; "
        "default: this machine's host name)",
    )
    parser.add_argument("--common-name", default="steam-edge", help="subject CN")
    parser.add_argument("--organization", help="subject O, e.g. the site's operator")
    parser.add_argument("--days", type=int, default=730, help="validity in days (default 730)")
    parser.add_argument("--force", action="store_true", help="overwrite existing files")


def _alt_names(uri: str, hosts: list[str]) -> list[x509.GeneralName]:
    names: list[x509.GeneralName] = [x509.UniformResourceIdentifier(uri)]
    for host in hosts:
        try:
            names.append(x509.IPAddress(ipaddress.ip_address(host)))
        except ValueError:
            names.append(x509.DNSName(host))
    return names


def main(args: argparse.Namespace) -> int:
    if ":" not in args.uri:
        raise ConfigError(f"--uri: expected a URI such as urn:site:steam-edge, got {args.uri!r}")
    if not 1 <= args.days <= 20 * 365:
        raise ConfigError(f"--days: expected 1..7300, got {args.days}")
    key_path, cert_path = Path(args.key), Path(args.cert)
    for path in (key_path, cert_path):
        if path.exists() and not args.force:
            raise ConfigError(f"{path} exists; pass --force to replace it")
    hosts = args.hosts or [socket.gethostname()]
    subject = {"organizationName": args.organization} if args.organization else {}
    key = cert_gen.generate_private_key()
    cert = cert_gen.generate_self_signed_app_certificate(
        key,
        args.common_name,
        subject,
        _alt_names(args.uri, hosts),
        extended=[ExtendedKeyUsageOID.CLIENT_AUTH],
        days=args.days,
    )
    key_bytes = cert_gen.dump_private_key_as_pem(key)
    cert_bytes = cert.public_bytes(serialization.Encoding.DER)
    for path in (key_path, cert_path):
        path.parent.mkdir(parents=True, exist_ok=True)
    # The key is written owner-only from the first byte on.
    fd = os.open(key_path, os.O_WRONLY | os.O_CREAT | os.O_TRUNC, 0o600)
    with os.fdopen(fd, "wb") as f:
        f.write(key_bytes)
    os.chmod(key_path, 0o600)
    cert_path.write_bytes(cert_bytes)
    print(f"private key:     {key_path} (PEM, mode 600)")
    print(f"certificate:     {cert_path} (DER, self-signed, {args.days} days)")
    print(f"application URI: {args.uri}")
    print(f"host names:      {', '.join(hosts)}")
    print(f"SHA-256:         {fingerprint(cert_bytes)}")
    print("Copy the certificate into the server's trusted certificates and set")
    print(f"application_uri: {args.uri} on the source.")
    return 0
