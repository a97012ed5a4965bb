"""The one secret reader (edge.config.secrets): env or file, surrounding whitespace
stripped, empty refused, a bounded read that never hangs."""

from __future__ import annotations

import os
from pathlib import Path

import pytest

from edge.config import read_secret
from edge.config.secrets import MAX_SECRET_BYTES
from edge.errors import ConfigError


@pytest.mark.parametrize(
    ("content", "expected"),
    [
        (b"s3cret\n", "s3cret"),  # an editor's newline
        (b"s3cret \n", "s3cret"),  # a trailing space: the case that locked API writes out
        (b"  s3cret\r\n", "s3cret"),  # leading blanks and a CR
        (b"two words\n", "two words"),  # inner whitespace is part of the secret
    ],
)
def test_file_secret_is_stripped_of_surrounding_whitespace(tmp_path: Path, content, expected):
    """A secret file means its text without surrounding whitespace."""
    path = tmp_path / "secret"
    path.write_bytes(content)
    assert read_secret(None, str(path), key="http.token") == expected


def test_env_secret_follows_the_same_rule():
    """A secret from the environment is stripped the same way."""
    assert read_secret("TOKEN", None, key="http.token", environ={"TOKEN": " s3cret\n"}) == "s3cret"


def test_nothing_configured_is_none():
    """Neither _env nor _file: no secret."""
    assert read_secret(None, None, key="http.token") is None


@pytest.mark.parametrize(
    ("content", "message"),
    [
        (b"", "is empty (or only whitespace)"),
        (b" \n\t\n", "is empty (or only whitespace)"),
        (b"\xff\xfe", "is not UTF-8 text"),
        (b"x" * (MAX_SECRET_BYTES + 1), "is larger than 64 KiB: not a secret file"),
    ],
)
def test_unusable_file_is_a_config_error_on_the_file_key(tmp_path: Path, content, message):
    """Empty, blank, not UTF-8 or too large: a ConfigError on <key>_file saying which."""
    path = tmp_path / "secret"
    path.write_bytes(content)
    with pytest.raises(ConfigError) as err:
        read_secret(None, str(path), key="notify[pager].secret")
    assert err.value.problems[0].path == "notify[pager].secret_file"
    assert message in err.value.problems[0].message


def test_dev_zero_is_refused_without_reading_it_all():
    """/dev/zero (endless) is refused as too large after a bounded read."""
    with pytest.raises(ConfigError, match="larger than 64 KiB"):
        read_secret(None, "/dev/zero", key="http.token")


def test_fifo_without_a_writer_is_refused_without_waiting(tmp_path: Path):
    """A FIFO nobody writes to reads as empty at once instead of blocking the start."""
    fifo = tmp_path / "fifo"
    os.mkfifo(fifo)
    with pytest.raises(ConfigError, match="is empty"):
        read_secret(None, str(fifo), key="http.token")


def test_missing_file_and_unset_env_name_their_key(tmp_path: Path):
    """A missing file and an unset variable are errors on <key>_file and <key>_env."""
    with pytest.raises(ConfigError, match=r"notify\[x\]\.secret_file: cannot read .*nope"):
        read_secret(None, str(tmp_path / "nope"), key="notify[x].secret")
    with pytest.raises(ConfigError, match=r"http\.token_env: environment variable T_X is not"):
        read_secret("T_X", None, key="http.token", environ={})
