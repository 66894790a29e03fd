"""Driving Tankside in tests: open a scenario headless, wait for its plan."""

from __future__ import annotations

import asyncio

from tui.app import make_app


async def settle(app, pilot):
    """Wait until the plan (made in a worker thread) and its sampling are shown."""
    await pilot.pause()
    await app.workers.wait_for_complete()
    await pilot.pause()


def drive(coro_fn, path, size=(150, 45), *, show_timing: bool = True):
    """Open ``path`` in Tankside at ``size``, wait for its plan, run ``coro_fn(app, pilot)``."""
    async def main():
        app = make_app(path, show_timing=show_timing)
        async with app.run_test(size=size) as pilot:
            await settle(app, pilot)
            await coro_fn(app, pilot)
    asyncio.run(main())
