"""Connecting to a Dask cluster, or starting a local one (worker processes on loopback)."""

from __future__ import annotations

from collections.abc import Iterator
from contextlib import contextmanager
from typing import TYPE_CHECKING

from coderel.errors import UsageError

if TYPE_CHECKING:
    from distributed import Client

#: Worker processes of the local cluster started when no scheduler address is given.
LOCAL_WORKERS = 2
#: Seconds to wait for a scheduler at a given address.
CONNECT_TIMEOUT = 30


def require_dask() -> None:
    """Refuse (exit 2) with the install command when dask or distributed is not installed."""
    try:
        import dask.dataframe  # noqa: F401
        import distributed  # noqa: F401
    except ImportError:
        raise UsageError(
            "--engine dask needs the optional packages dask and distributed, which are not "
            "installed: pip install 'coderel[dask]' (or use the default engine, --engine local)"
        ) from None


@contextmanager
def connect(scheduler: str | None, workers: int = LOCAL_WORKERS) -> Iterator[Client]:
    """A client of the scheduler at ``scheduler`` (``tcp://host:8786``), or of a local cluster
    of ``workers`` worker processes (one thread each) listening on 127.0.0.1 only; the local
    cluster is shut down on leaving."""
    require_dask()
    from distributed import Client, LocalCluster

    if scheduler:
        try:
            client = Client(scheduler, timeout=CONNECT_TIMEOUT)
        except (OSError, TimeoutError, ValueError) as exc:
            raise UsageError(
                f"no Dask scheduler answered at {scheduler!r} ({type(exc).__name__}); "
                "give the address the scheduler printed, e.g. tcp://10.0.0.5:8786"
            ) from None
        try:
            yield client
        finally:
            client.close()
        return
    with (
        LocalCluster(
            n_workers=workers,
            threads_per_worker=1,
            processes=True,
            host="127.0.0.1",
            dashboard_address="127.0.0.1:0",
        ) as cluster,
        Client(cluster) as client,
    ):
        yield client
