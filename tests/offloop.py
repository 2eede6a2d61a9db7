"""Running Playwright's sync API from tests outside tests/browser."""

from __future__ import annotations


def off_the_event_loop(work):
    """Run ``work()`` in a thread of its own and return its result (its exception is
    raised here). Playwright's sync API refuses to start in a thread whose event loop
    is already running, as it is while the session's shared browser (tests/browser) is
    open; a fresh thread has none."""
    from concurrent.futures import ThreadPoolExecutor

    with ThreadPoolExecutor(max_workers=1) as pool:
        return pool.submit(work).result()
