"""Flow tests share one Prefect local-mode server (its start-up takes 10-15 s on a loaded 2-core
machine, so the modules of this package share it); it and Prefect's background workers are
stopped after the last flow test, so no thread of theirs outlives these tests (a leftover
thread drawing on the `random` module makes later hypothesis tests flaky)."""

from __future__ import annotations

import inspect

import pytest


@pytest.fixture(scope="package", autouse=True)
def stop_prefect_afterwards():
    yield
    from prefect.events.worker import EventsWorker
    from prefect.logging.handlers import APILogWorker
    from prefect.server.api.server import SubprocessASGIServer
    from prefect.utilities.asyncutils import run_coro_as_sync

    async def drain() -> None:   # as prefect.testing.utilities.prefect_test_harness does
        try:
            result = APILogWorker.instance().drain()
            if inspect.isawaitable(result):
                await result
        except RuntimeError:
            pass   # never started
        result = EventsWorker.drain_all()
        if inspect.isawaitable(result):
            await result

    run_coro_as_sync(drain())
    server = SubprocessASGIServer._instances.pop(None, None)
    if server is not None:
        server.stop()
