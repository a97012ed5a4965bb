"""The one secret reader: the API token, webhook secrets, OPC UA and MQTT passwords, and
the ``alarms`` command's token all come through ``read_secret``; ``check_secret`` is the
load-time check of a ``<key>_env`` / ``<key>_file`` pair (names only, nothing read).

One rule for every secret: the value named by ``<key>_env`` (an environment variable) or
``<key>_file`` (a file), with surrounding whitespace stripped (an editor's newline, a
stray space or CR), refused when nothing is left. A file is read in at most
``MAX_SECRET_BYTES`` + 1 bytes without ever waiting for a writer, so ``/dev/zero``, a
huge file or a FIFO nobody writes to gives a clear error instead of filling memory or
hanging. Values are never logged.
"""

from __future__ import annotations

import os
import re
from collections.abc import Mapping
from typing import Any

from edge.config.yaml_lines import Path
from edge.errors import ConfigError, ConfigProblem

__all__ = ["MAX_SECRET_BYTES", "check_secret", "read_secret", "read_secret_file"]

_ENV_NAME = re.compile(r"[A-Za-z_][A-Za-z0-9_]*")

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


def check_secret(p: Path, model: Any, stem: str, out: list[tuple[Path, str]]) -> None:
    """Problems of the ``<stem>_env`` / ``<stem>_file`` pair of ``model`` at ``p``: both
    given, a variable name that cannot be one, an empty file name."""
    env, file = getattr(model, f"{stem}_env"), getattr(model, f"{stem}_file")
    if env is not None and file is not None:
        out.append(((*p, f"{stem}_file"), f"give {stem}_env or {stem}_file, not both"))
    if env is not None and not _ENV_NAME.fullmatch(env):
        out.append(((*p, f"{stem}_env"), f"{env!r} is not an environment variable name"))
    if file is not None and not file.strip():
        out.append(((*p, f"{stem}_file"), "the file name is empty"))
