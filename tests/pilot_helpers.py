"""Small shared pieces for the app tests driven with Textual's Pilot.

Imported by name (``from pilot_helpers import sync, settle``), like
tests/demo_resolved.py: plain functions, no fixtures.
"""

from __future__ import annotations

import asyncio
import functools

# Pilot presses keys by name; these are the characters the tests type that are not their own name.
KEY_NAMES = {" ": "space", ".": "full_stop", "-": "minus", ",": "comma", ":": "colon"}


def sync(fn):
    """Run an async Pilot test without an async pytest plugin."""
    @functools.wraps(fn)
    def wrapper(*args, **kwargs):
        asyncio.run(fn(*args, **kwargs))
    return wrapper


async def settle(app, pilot) -> None:
    """Wait for the app's workers, then let the screen catch up."""
    await app.workers.wait_for_complete()
    await pilot.pause()


async def type_text(pilot, text: str) -> None:
    """Type ``text`` one key at a time."""
    for ch in text:
        await pilot.press(KEY_NAMES.get(ch, ch))
