"""Test-session settings shared by all tests."""

from __future__ import annotations

import os

import pytest


@pytest.fixture(scope="session", autouse=True)
def _private_checksum_cache(tmp_path_factory: pytest.TempPathFactory) -> None:
    """Keep the file-checksum cache of the runs under test out of the user's home."""
    os.environ["EVTKIN_CACHE_DIR"] = str(tmp_path_factory.mktemp("evtkin-cache"))
