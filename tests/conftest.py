"""Shared test set-up: keep every test's history store out of the user's data folder."""

import pytest


@pytest.fixture(autouse=True)
def _private_history_store(tmp_path, monkeypatch):
    monkeypatch.setenv("RFMEAS_DB", str(tmp_path / "history.sqlite3"))
