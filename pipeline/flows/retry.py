"""Which failures a task may retry: transient I/O only, never parsing or bad settings."""

from __future__ import annotations

from ..errors import ArchiveError, WarehouseError

__all__ = ["TRANSIENT", "is_transient"]

# A network share that blinks, an archive that is restarting, a warehouse another process holds
# for a moment. Parsing fails the same way every time and is never retried.
TRANSIENT = (OSError, ArchiveError, WarehouseError)


def is_transient(task, task_run, state) -> bool:
    """Prefect ``retry_condition_fn``: retry only when the task failed with a TRANSIENT error."""
    return isinstance(getattr(state, "data", None), TRANSIENT)
