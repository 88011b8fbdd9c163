"""Head-sum blocks on a Dask cluster (the optional ``cluster`` extra).

The scheduler and workers are ordinary ``dask.distributed`` processes; the
workers need only spotcheck installed.  Each block is one task calling the
request's own function (:meth:`~spotcheck.engine.blocks.BlockRequest.task`:
:func:`~spotcheck.engine.blocks.compute_block` for a window,
:func:`~spotcheck.engine.blocks.compute_comb_block` for a comb, all its windows
in one task); its record comes back to the caller, which checks it before
adding it (see :func:`spotcheck.engine.blocks.sum_blocks`).  A worker lost mid-task has its
blocks rerun by Dask itself (``retries``).

``dask.distributed`` is imported only when a cluster is asked for.
"""

from __future__ import annotations

from collections.abc import Callable, Iterable, Iterator
from typing import Any

from spotcheck.engine.blocks import BlockRunner, Request
from spotcheck.errors import ClusterError, UsageError

__all__ = ["connect", "dask_runner", "INSTALL_HINT", "DASK_RETRIES"]

# --- tuning -----------------------------------------------------------------
# Times Dask reruns a block whose worker died or whose task failed.
DASK_RETRIES = 3
# Seconds to wait for the scheduler when connecting to an address.
CONNECT_TIMEOUT = 10
# Blocks submitted and not yet back, at most (blocks are generated lazily).
MAX_IN_FLIGHT = 1024
# ---------------------------------------------------------------------------

INSTALL_HINT = "a cluster needs dask.distributed: pip install 'spotcheck[cluster]'"


def _distributed() -> Any:
    try:
        import distributed
    except ImportError:
        raise UsageError(INSTALL_HINT) from None
    return distributed


def connect(cluster: Any) -> tuple[Any, bool]:
    """``(client, owned)`` for a scheduler address (``tcp://host:8786``) or an existing Client.

    ``owned`` is true when the client was opened here and should be closed by
    the caller.  Raises :class:`UsageError` without dask or when the
    scheduler cannot be reached (:class:`ClusterError`, a ``UsageError``).
    """
    distributed = _distributed()
    if isinstance(cluster, distributed.Client):
        return cluster, False
    if not isinstance(cluster, str) or not cluster.strip():
        raise UsageError(f"cluster must be a scheduler address such as tcp://host:8786, got {cluster!r}")
    # Built in two steps so that a client whose connection failed can be
    # disowned here: left to the garbage collector, its __del__ would try to
    # close it at exit and print a traceback after a 20 s timeout.
    client = distributed.Client.__new__(distributed.Client)
    try:
        client.__init__(cluster.strip(), timeout=CONNECT_TIMEOUT, set_as_default=False)
    except Exception as exc:  # noqa: BLE001 - any failure to connect is the same fact for the user
        _disown(client)
        raise ClusterError(f"cannot reach the Dask scheduler at {cluster}: {exc}") from None
    return client, True


def _disown(client: Any) -> None:
    """Stop a half-built client's event loop and mark it closed, without waiting."""
    try:
        client.status = "closed"
        runner = getattr(client, "_loop_runner", None)
        if runner is not None:
            runner.stop()
    except Exception:  # noqa: BLE001 - best effort on a broken object
        pass


def dask_runner(
    client: Any, *, compute: Callable[..., Any] | None = None, retries: int = DASK_RETRIES
) -> BlockRunner:
    """A block runner sending each block to ``client``'s cluster as one task.

    The task function is the request's own (``request.task()``); ``compute``,
    if given, replaces it with the same arguments (a top-level function, so
    workers import it by name).  Records are yielded as they complete, in any
    order.
    """
    distributed = _distributed()

    def run(request: Request, blocks: Iterable[tuple[int, int]]) -> Iterator[object]:
        fn, args = request.task()
        fn = compute or fn
        todo = iter(blocks)  # lazy: at most MAX_IN_FLIGHT tasks exist at once
        pending: set[Any] = set()

        def submit() -> Any | None:
            nxt = next(todo, None)
            if nxt is None:
                return None
            future = client.submit(fn, *args, *nxt, pure=False, retries=retries)
            pending.add(future)
            return future

        first = [f for f in (submit() for _ in range(MAX_IN_FLIGHT)) if f is not None]
        if not first:
            return
        queue = distributed.as_completed(first, loop=client.loop)
        try:
            for future in queue:
                pending.discard(future)
                record = future.result()
                future.release()
                nxt = submit()
                if nxt is not None:
                    queue.add(nxt)
                yield record
        finally:
            client.cancel([f for f in pending if not f.done()])

    return run
