"""Head-sum blocks on a Dask cluster (the optional ``cluster`` extra).

The scheduler and workers are ordinary ``dask.distributed`` processes; the
workers need only spotcheck installed.  Each block is one task calling
:func:`spotcheck.engine.blocks.compute_block`; its :class:`BlockRecord` comes
back to the caller, which checks it before adding it (see
:func:`spotcheck.engine.blocks.sum_blocks`).  A worker lost mid-task has its
blocks rerun by Dask itself (``retries``).

``dask.distributed`` is imported only when a cluster is asked for.
"""

from __future__ import annotations

from collections.abc import Callable, Iterator, Sequence
from typing import Any

from spotcheck.engine.blocks import BlockRequest, BlockRunner, compute_block
from spotcheck.errors import UsageError

__all__ = ["connect", "dask_runner", "INSTALL_HINT", "DASK_RETRIES"]

# --- tuning -----------------------------------------------------------------
# Times Dask reruns a block whose worker died or whose task failed.
DASK_RETRIES = 3
# Seconds to wait for the scheduler when connecting to an address.
CONNECT_TIMEOUT = 10
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
    scheduler cannot be reached.
    """
    distributed = _distributed()
    if isinstance(cluster, distributed.Client):
        return cluster, False
    if not isinstance(cluster, str) or not cluster.strip():
        raise UsageError(f"cluster must be a scheduler address such as tcp://host:8786, got {cluster!r}")
    try:
        client = distributed.Client(cluster.strip(), timeout=CONNECT_TIMEOUT, set_as_default=False)
    except (OSError, TimeoutError, ValueError) as exc:
        raise UsageError(f"cannot reach the Dask scheduler at {cluster}: {exc}") from None
    return client, True


def dask_runner(
    client: Any, *, compute: Callable[..., Any] = compute_block, retries: int = DASK_RETRIES
) -> BlockRunner:
    """A block runner sending each block to ``client``'s cluster as one task.

    ``compute`` is the task function (a top-level function, so workers import
    it by name); records are yielded as they complete, in any order.
    """
    distributed = _distributed()

    def run(request: BlockRequest, blocks: Sequence[tuple[int, int]]) -> Iterator[object]:
        if not blocks:
            return
        s, d, w = request.series, request.d, request.words
        futures = [client.submit(compute, s, d, w, k0, k1, pure=False, retries=retries) for k0, k1 in blocks]
        try:
            for future in distributed.as_completed(futures, loop=client.loop):
                yield future.result()
                future.release()
        finally:
            client.cancel([f for f in futures if not f.done()])

    return run
