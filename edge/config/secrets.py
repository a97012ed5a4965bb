"""The one secret reader: the API token, webhook secrets, OPC UA and MQTT passwords, and
the ``alarms`` command's token all come through ``read_secret``.

One rule for every secret: the value named by ``<key>_env`` (an environment variable) or
``<key>_file`` (a file), with surrounding whitespace stripped (an editor's newline, a
stray space or CR), refused when nothing is left. A file is read in at most
``MAX_SECRET_BYTES`` + 1 bytes without ever waiting for a writer, so ``/dev/zero``, a
huge file or a FIFO nobody writes to gives a clear error instead of filling memory or
hanging. Values are never logged.
"""

from __future__ import annotations

import os
from collections.abc import Mapping

from edge.errors import ConfigError, ConfigProblem

__all__ = ["MAX_SECRET_BYTES", "read_secret", "read_secret_file"]

MAX_SECRET_BYTES = 64 * 1024  # far above any token, password or key a config names


def read_secret_file(path: str) -> str:
    """The secret in the file ``path``, stripped. Raises ValueError with a one-line
    reason: cannot read it, too large, not UTF-8, or nothing but whitespace."""
    try:
        fd = os.open(path, os.O_RDONLY | os.O_NONBLOCK | os.O_CLOEXEC)
    except OSError as exc:
        raise ValueError(f"cannot read {path}: {exc.strerror or exc}") from exc
    chunks: list[bytes] = []
    size = 0
    try:
        while size <= MAX_SECRET_BYTES:
            try:
                chunk = os.read(fd, MAX_SECRET_BYTES + 1 - size)
            except BlockingIOError:
                break  # a pipe with nothing (more) in it: never wait for a writer
            except OSError as exc:
                raise ValueError(f"cannot read {path}: {exc.strerror or exc}") from exc
            if not chunk:
                break
            chunks.append(chunk)
            size += len(chunk)
    finally:
        os.close(fd)
    if size > MAX_SECRET_BYTES:
        raise ValueError(f"{path} is larger than {MAX_SECRET_BYTES // 1024} KiB: not a secret file")
    try:
        value = b"".join(chunks).decode("utf-8").strip()
    except UnicodeDecodeError as exc:
        raise ValueError(f"{path} is not UTF-8 text") from exc
    if not value:
        raise ValueError(f"{path} is empty (or only whitespace)")
    return value


def read_secret(
    env: str | None,
    file: str | None,
    *,
    key: str,
    environ: Mapping[str, str] | None = None,
) -> str | None:
    """The secret configured as ``<key>_env`` / ``<key>_file`` (``key`` is its config path,
    e.g. ``http.token`` or ``notify[pager].secret``), stripped; None when neither is set.
    Raises ConfigError naming ``<key>_env`` or ``<key>_file``."""
    environ = os.environ if environ is None else environ
    if env:
        value = environ.get(env, "").strip()
        if not value:
            raise ConfigError(
                [ConfigProblem(f"{key}_env", f"environment variable {env} is not set or empty")]
            )
        return value
    if file:
        try:
            return read_secret_file(file)
        except ValueError as exc:
            raise ConfigError([ConfigProblem(f"{key}_file", str(exc))]) from exc
    return None
