"""Test-wide set-up: the console's layout does not depend on the terminal the suite runs in.

The console table and the summary line wrap to ``COLUMNS`` when it is set (a terminal, or a
test runner that exports its own width to worker processes); the tests that read the printed
text expect the piped layout, so every test runs without ``COLUMNS`` and ``LINES``.
"""

import pytest


@pytest.fixture(autouse=True)
def _piped_console_layout(monkeypatch):
    monkeypatch.delenv("COLUMNS", raising=False)
    monkeypatch.delenv("LINES", raising=False)
