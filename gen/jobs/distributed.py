"""Distributed generation on Dask: one task per batch part, the same parts as the batch route.

Each task calls `gen.run.run` for one job index with the shared grid, exactly as
`gen run --grid G --job I --jobs N` does, so the events are bit-identical to the batch route.
`workers=K` starts a local cluster of K single-threaded worker processes; `scheduler=ADDRESS`
uses a running one (for example started on SLURM or HTCondor through dask-jobqueue), whose
workers must see the output folder. Dask is an optional extra: `pip install 'gen[dask]'`.
"""

from __future__ import annotations

import contextlib
import os
import uuid
from pathlib import Path

from ..card import parse_card
from ..errors import UserError
from ..progress import Progress
from ..sampling.grid import Grid

__all__ = ["run_parts_on_dask", "local_cluster_config"]


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
    MALLOC_TRIM_THRESHOLD_ made chunked numpy work run at a third of its speed here)."""
    import dask

    env = dict(dask.config.get("distributed.nanny.pre-spawn-environ", {}))
    env.pop("MALLOC_TRIM_THRESHOLD_", None)
    return {"distributed.nanny.pre-spawn-environ": env}


def run_parts_on_dask(cfg, grid_path: Path, jobs: int, folder: Path, *, workers: int | None = None,
                      scheduler: str | None = None, overrides: dict | None = None,
                      progress: Progress | None = None, client=None, replace: bool = False) -> list[dict]:
    """Run parts 0..jobs-1 as Dask tasks; returns one summary per part, in job order.

    `client` is an already connected `dask.distributed.Client` to use instead of a new cluster.
    """
    try:
        import dask
        from dask.distributed import Client, LocalCluster, as_completed
    except ImportError:
        raise UserError("Dask is not installed; install the extra with `pip install 'gen[dask]'` "
                        "(or run the parts as batch jobs with --job)") from None
    progress = progress or Progress(enabled=False)
    grid_doc = Path(grid_path).read_text(encoding="utf-8")
    had_trim = "MALLOC_TRIM_THRESHOLD_" in os.environ
    with contextlib.ExitStack() as stack:
        if client is not None:
            pass
        elif scheduler:
            try:
                client = stack.enter_context(Client(scheduler, timeout="20s"))
            except (OSError, TimeoutError) as exc:
                raise UserError(f"cannot reach the Dask scheduler at {scheduler}: {exc}") from None
        else:
            stack.enter_context(dask.config.set(local_cluster_config()))
            cluster = stack.enter_context(LocalCluster(n_workers=workers, threads_per_worker=1, processes=True,
                                                       dashboard_address=None))
            client = stack.enter_context(Client(cluster))
            if not had_trim:
                os.environ.pop("MALLOC_TRIM_THRESHOLD_", None)
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
