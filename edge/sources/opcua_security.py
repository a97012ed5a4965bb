"""OPC UA security for one source.

    policy and mode   None, or Sign / SignAndEncrypt with Basic256Sha256,
                      Aes128_Sha256_RsaOaep or Aes256_Sha256_RsaPss
    client identity   certificate and private key from files (``steam-edge make-cert``)
    server identity   its certificate pinned (``server_certificate``) or checked against a
                      folder of trusted certificates (``trust_dir``); a mismatch refuses the
                      connection before any credential is sent
    user              user name, password from ``password_env`` / ``password_file``

A password is read when a connection is opened and handed to the client; it is never
logged, never put in an error message and never kept on the source object.
"""

from __future__ import annotations

import hashlib
from datetime import UTC, datetime
from pathlib import Path

from asyncua import Client, ua
from asyncua.crypto import security_policies as sp
from asyncua.crypto import uacrypto
from cryptography import x509
from cryptography.hazmat.primitives import serialization

from edge.config import OpcUaSecurity, OpcUaSource, read_secret
from edge.errors import ConfigError, SecurityError, SourceError

__all__ = [
    "POLICIES",
    "apply_security",
    "check_server_certificate",
    "fingerprint",
    "read_password",
]

POLICIES: dict[str, type[sp.SecurityPolicy]] = {
    "Basic256Sha256": sp.SecurityPolicyBasic256Sha256,
    "Aes128_Sha256_RsaOaep": sp.SecurityPolicyAes128Sha256RsaOaep,
    "Aes256_Sha256_RsaPss": sp.SecurityPolicyAes256Sha256RsaPss,
}
MODES = {
    "None": ua.MessageSecurityMode.None_,
    "Sign": ua.MessageSecurityMode.Sign,
    "SignAndEncrypt": ua.MessageSecurityMode.SignAndEncrypt,
}
DEFAULT_APPLICATION_URI = "urn:steam-edge:client"
_CERT_SUFFIXES = (".der", ".pem", ".crt", ".cer")


def config_problem(message: str, source: str) -> SourceError:
    """A mistake in the source's configuration: retrying will not help until it is fixed."""
    return SourceError(message, source=source, kind="config")


def read_password(src: OpcUaSource) -> str | None:
    """The password from the environment variable or file the config names (not logged)."""
    if src.password_env and src.password_file:
        raise config_problem("give password_env or password_file, not both", src.name)
    try:
        value = read_secret(src.password_env, src.password_file, key="password")
    except ConfigError as exc:
        raise config_problem(str(exc), src.name) from exc
    if value is None and src.username:
        raise config_problem(
            f"username {src.username!r} is set but neither password_env nor password_file",
            src.name,
        )
    return value


def fingerprint(der: bytes) -> str:
    """SHA-256 fingerprint of a DER certificate, as colon-separated hex."""
    return ":".join(f"{b:02X}" for b in hashlib.sha256(der).digest())


def _first_certificate(der: bytes) -> bytes:
    """The first certificate of a DER chain (servers may send their whole chain)."""
    if len(der) < 4 or der[0] != 0x30:
        return der
    if der[1] < 0x80:
        return der[: 2 + der[1]]
    n = der[1] & 0x7F
    return der[: 2 + n + int.from_bytes(der[2 : 2 + n], "big")]


def _read_file(path: str, what: str, source: str) -> bytes:
    try:
        return Path(path).read_bytes()
    except OSError as exc:
        raise config_problem(f"cannot read {what} {path}: {exc.strerror}", source) from exc


def load_certificate(path: str, what: str, source: str) -> x509.Certificate:
    """A certificate from a PEM or DER file, whatever its name ends with."""
    data = _read_file(path, what, source)
    try:
        if b"-----BEGIN" in data:
            return x509.load_pem_x509_certificate(data)
        return x509.load_der_x509_certificate(_first_certificate(data))
    except ValueError as exc:
        raise config_problem(f"{what} {path} is not a PEM or DER certificate", source) from exc


def _der(cert: x509.Certificate) -> bytes:
    return cert.public_bytes(serialization.Encoding.DER)


def _describe(cert: x509.Certificate) -> str:
    return f"{cert.subject.rfc4514_string() or 'no subject'}, SHA-256 {fingerprint(_der(cert))}"


def _trusted_in(folder: str, cert: x509.Certificate, source: str) -> bool:
    try:
        files = sorted(p for p in Path(folder).iterdir() if p.suffix.lower() in _CERT_SUFFIXES)
    except OSError as exc:
        raise config_problem(f"cannot read trust_dir {folder}: {exc.strerror}", source) from exc
    der = _der(cert)
    now = datetime.now(UTC)
    in_date = cert.not_valid_before_utc <= now <= cert.not_valid_after_utc
    for path in files:
        try:
            trusted = load_certificate(str(path), "trusted certificate", source)
        except SourceError:
            continue  # a key, a CRL or a stray file: not a certificate to trust
        if _der(trusted) == der:
            return True
        try:
            cert.verify_directly_issued_by(trusted)
        except Exception:  # not its issuer, or a key type that cannot tell
            continue
        if in_date:
            return True
    return False


def check_server_certificate(der: bytes, security: OpcUaSecurity, source: str) -> None:
    """Refuse a server whose certificate is neither the pinned one nor trusted by the trust
    folder. Raises SecurityError naming both fingerprints."""
    try:
        offered = x509.load_der_x509_certificate(_first_certificate(der))
    except ValueError as exc:
        raise SecurityError("the server sent no readable certificate", source=source) from exc
    if security.server_certificate:
        pinned = load_certificate(security.server_certificate, "server_certificate", source)
        if _der(pinned) != _der(offered):
            raise SecurityError(
                f"server certificate does not match the pinned one: the server presents "
                f"{_describe(offered)}; {security.server_certificate} holds {_describe(pinned)}",
                source=source,
            )
        return
    if security.trust_dir:
        if not _trusted_in(security.trust_dir, offered, source):
            raise SecurityError(
                f"server certificate ({_describe(offered)}) is not trusted by any certificate "
                f"in trust_dir {security.trust_dir}",
                source=source,
            )
        return
    raise config_problem(
        f"security policy {security.policy} needs the server's certificate pinned "
        f"(server_certificate) or a trust_dir; the server presents {_describe(offered)}",
        source,
    )


def _check_combination(security: OpcUaSecurity, source: str) -> None:
    if (security.policy == "None") != (security.mode == "None"):
        raise config_problem(
            f"security policy {security.policy} with mode {security.mode}: policy None goes "
            "with mode None, any other policy with Sign or SignAndEncrypt",
            source,
        )
    if security.policy != "None" and not (security.certificate and security.private_key):
        raise config_problem(
            f"security policy {security.policy} needs certificate and private_key "
            "(make them with: steam-edge make-cert)",
            source,
        )


def _application_uri(cert: x509.Certificate) -> str | None:
    try:
        san = cert.extensions.get_extension_for_class(x509.SubjectAlternativeName)
    except x509.ExtensionNotFound:
        return None
    uris = san.value.get_values_for_type(x509.UniformResourceIdentifier)
    return uris[0] if uris else None


async def apply_security(client: Client, src: OpcUaSource) -> str | None:
    """Set up ``client`` for ``src``'s policy, mode, certificates and user; returns the
    server certificate's fingerprint when the channel is secured. Call before connect()."""
    security = src.security
    _check_combination(security, src.name)
    password = read_password(src)
    if src.username:
        client.set_user(src.username)
        client.set_password(password or "")
    client.application_uri = src.application_uri or DEFAULT_APPLICATION_URI
    if security.policy == "None":
        return None
    assert security.certificate and security.private_key
    cert = load_certificate(security.certificate, "certificate", src.name)
    key_data = _read_file(security.private_key, "private_key", src.name)
    key_ext = "pem" if b"-----BEGIN" in key_data else "der"
    try:
        await uacrypto.load_private_key(key_data, None, key_ext)
    except (ValueError, TypeError) as exc:
        raise config_problem(
            f"private_key {security.private_key} is not an unencrypted PEM or DER key", src.name
        ) from exc
    client.application_uri = src.application_uri or _application_uri(cert) or client.application_uri
    policy, mode = POLICIES[security.policy], MODES[security.mode]
    endpoints = await client.connect_and_get_server_endpoints()
    offered = [
        ep
        for ep in endpoints
        if ep.SecurityPolicyUri == policy.URI and ep.SecurityMode == mode and ep.ServerCertificate
    ]
    if not offered:
        have = sorted(
            {
                f"{ep.SecurityPolicyUri.rpartition('#')[2]}/{ep.SecurityMode.name}"
                for ep in endpoints
            }
        )
        raise SecurityError(
            f"server offers no endpoint with policy {security.policy} and mode {security.mode} "
            f"(it offers: {', '.join(have) or 'nothing'})",
            source=src.name,
        )
    server_der = _first_certificate(offered[0].ServerCertificate)
    check_server_certificate(server_der, security, src.name)
    await client.set_security(
        policy,
        certificate=uacrypto.CertProperties(_der(cert), "der"),
        private_key=uacrypto.CertProperties(key_data, key_ext),
        server_certificate=uacrypto.CertProperties(server_der, "der"),
        mode=mode,
    )
    return fingerprint(server_der)
