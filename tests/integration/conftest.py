"""Fixtures the integration tests share."""

from __future__ import annotations

import pytest

from tests.integration.servicekit import TOKEN


@pytest.fixture
def token_env(monkeypatch: pytest.MonkeyPatch) -> str:
    """The test API token in STEAMEDGE_TEST_TOKEN (the variable servicekit's configs name
    in http.token_env), and no STEAMEDGE_API_TOKEN leaking in from the environment."""
    monkeypatch.setenv("STEAMEDGE_TEST_TOKEN", TOKEN)
    monkeypatch.delenv("STEAMEDGE_API_TOKEN", raising=False)
    return TOKEN
