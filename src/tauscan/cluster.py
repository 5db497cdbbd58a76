"""Batch scans on a Dask distributed cluster (``--cluster ADDRESS``).

The same :class:`~tauscan.pipeline.ScanRequest` objects as a local batch are sent to the
scheduler; each worker scans in the client's working folder, so relative netlist paths,
included files and the reports' file names are what a local run gives.  The workers must
therefore see the same files at the same paths (a shared file system) and have the same
version of tauscan installed.  dask.distributed is an optional extra (``pip install
'tauscan[cluster]'``).
"""

from __future__ import annotations

import os
import threading

from tauscan.errors import SettingsError, TauscanError

# a worker process may run several tasks in threads; the working folder is per process
_FOLDER_LOCK = threading.Lock()


def scan_in_folder(request, folder: str, batch: bool = False):
    """One scan on a worker, in ``folder`` (the client's working folder); in a ``batch`` an
    error in the input comes back as a failure record, as a local batch has it."""
    from tauscan.pipeline import scan_in_worker, scan_in_worker_or_failure

    with _FOLDER_LOCK:
        previous = os.getcwd()
        try:
            os.chdir(folder)
        except OSError:
            raise SettingsError(f"--cluster: a worker cannot see the folder {folder} "
                                "(workers need the same files at the same paths)") from None
        try:
            return scan_in_worker_or_failure(request) if batch else scan_in_worker(request)
        finally:
            os.chdir(previous)


def run_on_cluster(requests: list, address: str, timeout: float = 15.0) -> list:
    """Scan every request on the cluster at ``address``; results in the order of ``requests``."""
    try:
        from distributed import Client
    except ImportError:
        raise SettingsError("--cluster needs dask.distributed: pip install 'tauscan[cluster]'") from None
    try:
        client = Client(address, timeout=timeout, set_as_default=False)
    except TauscanError:
        raise
    except Exception as exc:  # OSError, TimeoutError, ValueError for a malformed address
        reason = str(exc).splitlines()[0] if str(exc) else type(exc).__name__
        raise SettingsError(f"--cluster {address}: cannot reach the scheduler ({reason})") from None
    try:
        futures = client.map(scan_in_folder, requests, folder=os.getcwd(), batch=len(requests) > 1, pure=False)
        return client.gather(futures)
    finally:
        client.close()
