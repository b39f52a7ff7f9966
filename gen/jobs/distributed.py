"""Distributed generation on Dask: one task per batch part, the same parts as the batch route.

Each task calls `gen.run.run` for one job index with the shared grid, exactly as
`gen run --grid G --job I --jobs N` does, so the events are bit-identical to the batch route.
`workers=K` starts a local cluster of K single-threaded worker processes; `scheduler=ADDRESS`
uses a running one (for example started on SLURM or HTCondor through dask-jobqueue), whose
workers must see the output folder; its credentials come from Dask's own configuration
(`distributed.comm.tls.*`). The local cluster speaks mutual TLS with temporary credentials on
127.0.0.1, dashboard off. Dask is an optional extra: `pip install 'gen[dask]'`.
"""

from __future__ import annotations

import contextlib
import os
import re
import uuid
from pathlib import Path

from ..card import parse_card
from ..errors import UserError
from ..progress import Progress
from ..sampling.grid import Grid

__all__ = ["run_parts_on_dask", "local_cluster", "local_cluster_config", "check_scheduler_address"]

_SCHEMES = ("tcp", "tls", "ws", "wss", "ucx", "inproc")
_ADDRESS = re.compile(r"^(?P<scheme>[a-z]+)://(?P<host>[^\s/:]+|\[[0-9a-fA-F:]+\])(?::(?P<port>\d{1,5}))?/?$")


def check_scheduler_address(address: str) -> str:
    """Refuse a `--scheduler` value Dask could not connect to, before anything is written."""
    m = _ADDRESS.match(address.strip())
    if m is None or m["scheme"] not in _SCHEMES or (m["port"] is not None and not 0 < int(m["port"]) < 65536):
        raise UserError(f"--scheduler {address!r} is not a Dask scheduler address; expected "
                        f"PROTOCOL://HOST:PORT with PROTOCOL one of {', '.join(_SCHEMES)} "
                        "(for example tls://10.0.0.5:8786)")
    return address.strip()


def _part_task(card_text: str, source: str, overrides: dict, grid_doc: str, job: int, jobs: int, folder: str,
               replace: bool = False) -> dict:
    """Run one part on a worker; returns what the driver reports."""
    import json
    import tempfile

    from .run import run

    cfg = parse_card(card_text, source).with_overrides(**overrides)
    with tempfile.TemporaryDirectory() as tmp:  # the grid travels as data, loaded through its checks
        path = Path(tmp) / "grid.json"
        path.write_text(grid_doc, encoding="utf-8")
        grid = Grid.load(path)
    res = run(cfg, folder=folder, grid=grid, job=job, jobs=jobs, replace=replace)
    return {"job": job, "skipped": res.skipped, "files": [str(f) for f in res.files],
            "pid": os.getpid(), "grid": json.loads(grid_doc)["checksum"]}


def local_cluster_config() -> dict:
    """Dask settings for local workers: keep glibc's default trimming (the nanny's low
    MALLOC_TRIM_THRESHOLD_ made chunked numpy work run at a third of its speed here), and no
    unauthenticated HTTP pages."""
    import dask

    env = dict(dask.config.get("distributed.nanny.pre-spawn-environ", {}))
    env.pop("MALLOC_TRIM_THRESHOLD_", None)
    # the scheduler and workers keep a plain-HTTP server (health, metrics, worker pages) even with the
    # dashboard off; it serves nothing here
    return {"distributed.nanny.pre-spawn-environ": env, "distributed.scheduler.http.routes": [],
            "distributed.worker.http.routes": []}


def _dask():
    try:
        import dask.distributed
    except ImportError:
        raise UserError("Dask is not installed; install the extra with `pip install 'gen[dask]'` "
                        "(or run the parts as batch jobs with --job)") from None
    return dask.distributed


@contextlib.contextmanager
def local_cluster(workers: int):
    """A client on a local cluster of `workers` single-threaded processes that only this process
    can reach (see `_temporary_security`); closed on exit."""
    import dask

    dd = _dask()
    security = _temporary_security()
    had_trim = "MALLOC_TRIM_THRESHOLD_" in os.environ
    with contextlib.ExitStack() as stack:
        stack.enter_context(dask.config.set(local_cluster_config()))
        cluster = stack.enter_context(dd.LocalCluster(n_workers=workers, threads_per_worker=1, processes=True,
                                                      dashboard_address=None, protocol="tls", host="127.0.0.1",
                                                      security=security))
        client = stack.enter_context(dd.Client(cluster, security=security))
        if not had_trim:
            os.environ.pop("MALLOC_TRIM_THRESHOLD_", None)
        yield client


def _temporary_security():
    """Mutual TLS with a key pair made for this cluster alone: the scheduler and workers listen on
    127.0.0.1 and accept only peers holding this run's certificate, so another local user cannot
    connect and run code on our workers."""
    try:
        from distributed.security import Security

        return Security.temporary()
    except ImportError:
        raise UserError("a local Dask cluster needs the 'cryptography' package for its TLS credentials; "
                        "install the extra with `pip install 'gen[dask]'`") from None


def run_parts_on_dask(cfg, grid_path: Path, jobs: int, folder: Path, *, workers: int | None = None,
                      scheduler: str | None = None, overrides: dict | None = None,
                      progress: Progress | None = None, client=None, replace: bool = False) -> list[dict]:
    """Run parts 0..jobs-1 as Dask tasks; returns one summary per part, in job order.

    `client` is an already connected `dask.distributed.Client` to use instead of a new cluster.
    """
    as_completed = _dask().as_completed
    progress = progress or Progress(enabled=False)
    grid_doc = Path(grid_path).read_text(encoding="utf-8")
    with contextlib.ExitStack() as stack:
        if client is not None:
            pass
        elif scheduler:
            try:
                client = stack.enter_context(_dask().Client(scheduler, timeout="20s"))
            except (OSError, TimeoutError, TypeError, ValueError) as exc:
                raise UserError(f"cannot reach the Dask scheduler at {scheduler}: {exc}") from None
        else:
            client = stack.enter_context(local_cluster(workers))
        run_id = uuid.uuid4().hex[:12]  # a fresh key per call: Dask would hand back an earlier call's result
        futures = [client.submit(_part_task, cfg.text, cfg.source, overrides or {}, grid_doc, j, jobs,
                                 str(Path(folder).resolve()), replace, key=f"gen-part-{j:05d}-{run_id}", pure=False)
                   for j in range(jobs)]
        progress.stage("parts", jobs)
        done = []
        for fut in as_completed(futures):
            done.append(fut.result())
            progress.update(len(done), f"{len(done)}/{jobs} parts")
        progress.end(f"{jobs} parts")
    return sorted(done, key=lambda d: d["job"])
