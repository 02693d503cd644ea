"""SVG snapshots of the console's main screens (pytest-textual-snapshot).

Deterministic: a fixed two-body scenario, a frozen clock, a fixed session file name, and the
replan worker run to completion before each picture.  After an intended change of the layout,
review the pictures and accept them with ``pytest tests/test_console_snapshots.py
--snapshot-update``.
"""

from __future__ import annotations

import sys
from pathlib import Path

import pytest

sys.path.insert(0, str(Path(__file__).parent))
from test_console import console, make_session, settle  # noqa: E402  (shared console helpers)


@pytest.fixture()
def app(tmp_path):
    session = make_session(tmp_path, name="snapshot.burn")
    yield console(session)
    session.close()


async def _ready(pilot):
    await settle(pilot)


def test_main_screen_100x30(app, snap_compare):
    assert snap_compare(app, terminal_size=(100, 30), run_before=_ready)


def test_main_screen_160x45(app, snap_compare):
    assert snap_compare(app, terminal_size=(160, 45), run_before=_ready)


def test_help_screen(app, snap_compare):
    assert snap_compare(app, terminal_size=(100, 40), run_before=_ready, press=["f1"])


def test_record_form(app, snap_compare):
    assert snap_compare(app, terminal_size=(100, 30), run_before=_ready, press=["f4"])


def test_burn_details(app, snap_compare):
    assert snap_compare(app, terminal_size=(120, 40), run_before=_ready, press=["down", "down", "down", "down"])


def test_orbit_sketch(app, snap_compare):
    assert snap_compare(app, terminal_size=(120, 40), run_before=_ready, press=["f8", "f8"])
