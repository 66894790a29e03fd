"""A real server for the browser and concurrency tests: uvicorn on a free
port of 127.0.0.1, in a thread of the test process."""

from __future__ import annotations

import socket
import threading
import time
from contextlib import contextmanager

import uvicorn

from dosing.web import create_app


def _free_port() -> int:
    with socket.socket() as s:
        s.bind(("127.0.0.1", 0))
        return s.getsockname()[1]


@contextmanager
def serving(site):
    """Serve ``site``; yields its base URL; stops the server after."""
    port = _free_port()
    server = uvicorn.Server(uvicorn.Config(create_app(site), host="127.0.0.1", port=port,
                                           log_level="warning"))
    thread = threading.Thread(target=server.run, daemon=True)
    thread.start()
    deadline = time.monotonic() + 20
    while not server.started:
        if time.monotonic() > deadline or not thread.is_alive():
            raise RuntimeError("the test server did not start")
        time.sleep(0.05)
    try:
        yield f"http://127.0.0.1:{port}"
    finally:
        server.should_exit = True
        thread.join(10)
