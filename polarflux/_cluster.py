"""A dask.distributed client for a batch: a LocalCluster of process workers, or a scheduler's address."""

from __future__ import annotations

import contextlib
from collections.abc import Iterator

from .errors import SettingsError

__all__ = ["dask_client"]


@contextlib.contextmanager
def dask_client(address: str, jobs: int) -> Iterator[object]:
    """Yield a connected ``dask.distributed.Client``; close it (and a local cluster) afterwards.

    ``address`` "local" starts a LocalCluster of ``jobs`` single-threaded process workers on
    127.0.0.1 (FITS, WCS and the forecast's work hold the GIL, so threads would not help).
    """
    try:
        from dask.distributed import Client, LocalCluster
    except ImportError:
        raise SettingsError("--dask needs the dask extra: pip install 'polarflux[dask]'") from None
    cluster = None
    if address == "local":
        cluster = LocalCluster(n_workers=max(1, int(jobs)), threads_per_worker=1, processes=True,
                               host="127.0.0.1", dashboard_address=None)
        client = Client(cluster)
    else:
        try:
            client = Client(address, timeout=30)
        except OSError as exc:
            raise SettingsError(f"--dask {address}: cannot reach the scheduler ({exc})") from None
    try:
        yield client
    finally:
        client.close()
        if cluster is not None:
            cluster.close()
