"""Running the grid: in this process, in a local process pool, or on Ray; each finished run saved at once."""

from __future__ import annotations

import glob
import json
import os
from collections.abc import Callable, Iterable

from .._io import atomic_open, make_folder
from ..errors import ConfigError, IntervgnnError, RunError, WriteError
from .config import ExperimentConfig
from .runs import FORMAT, RunSpec, check_networks, execute_run, plan_runs, run_digest

__all__ = ["RunStore", "run_grid"]


class RunStore:
    """One JSON file per finished run under ``<output>/runs/``, each written atomically."""

    def __init__(self, output: str):
        self.folder = os.path.join(output, "runs")

    def path(self, spec: RunSpec) -> str:
        return os.path.join(self.folder, spec.key + ".json")

    def prepare(self, resume: bool) -> None:
        make_folder(self.folder)
        # temporary files of a run that was killed while being written
        stale = glob.glob(os.path.join(self.folder, ".*.tmp"))
        if not resume:
            stale += glob.glob(os.path.join(self.folder, "*.json"))
        for old in stale:
            try:
                os.remove(old)
            except FileNotFoundError:
                pass
            except OSError as exc:
                raise WriteError(f"{old}: cannot remove the file ({exc.__class__.__name__}: {exc.strerror or exc})") from exc

    def finished(self, spec: RunSpec, digest: str) -> bool:
        p = self.path(spec)
        if not os.path.exists(p):
            return False
        try:
            with open(p, encoding="utf-8") as fh:
                rec = json.load(fh)
        except (OSError, ValueError):
            return False
        return rec.get("format") == FORMAT and rec.get("digest") == digest

    def save(self, spec: RunSpec, record: dict) -> None:
        with atomic_open(self.path(spec), "w") as fh:
            json.dump(record, fh)

    def load(self, spec: RunSpec) -> dict:
        with open(self.path(spec), encoding="utf-8") as fh:
            return json.load(fh)


def _init_worker() -> None:
    import torch

    torch.set_num_threads(1)


def _local(todo: list[RunSpec], cfg: ExperimentConfig, workers: int, on_done: Callable, on_fail: Callable) -> None:
    if workers <= 1 or len(todo) <= 1:
        for spec in todo:
            try:
                record = execute_run(spec, cfg)
            except Exception as exc:  # one failed run must not cost the others
                on_fail(spec, exc)
            else:
                on_done(spec, record)
        return
    import multiprocessing as mp
    from concurrent.futures import ProcessPoolExecutor, as_completed

    os.environ.setdefault("OMP_NUM_THREADS", "1")
    with ProcessPoolExecutor(max_workers=workers, mp_context=mp.get_context("spawn"), initializer=_init_worker) as pool:
        futures = {pool.submit(execute_run, spec, cfg): spec for spec in todo}
        for fut in as_completed(futures):
            try:
                record = fut.result()
            except Exception as exc:
                on_fail(futures[fut], exc)
            else:
                on_done(futures[fut], record)


def _ray(todo: list[RunSpec], cfg: ExperimentConfig, workers: int, address: str | None, on_done: Callable, on_fail: Callable) -> None:
    try:
        import ray
    except ImportError:
        raise ConfigError("the ray executor needs Ray: pip install 'intervgnn[ray]'") from None
    started = False
    if not ray.is_initialized():
        kwargs = {"include_dashboard": False, "log_to_driver": False, "configure_logging": False}
        if address:
            ray.init(address=address, **kwargs)
        else:
            # Ray lowers its workers' priority (nice 15) by default; runs of a local
            # instance get the same share of the machine as the local pool's
            ray.init(num_cpus=workers, _system_config={"worker_niceness": 0}, **kwargs)
        started = True
    try:
        remote = ray.remote(num_cpus=1)(_ray_task)
        pending = {remote.remote(spec, cfg): spec for spec in todo}
        while pending:
            done, _ = ray.wait(list(pending), num_returns=1)
            for ref in done:
                spec = pending.pop(ref)
                try:
                    record = ray.get(ref)
                except Exception as exc:
                    # a task's own exception arrives wrapped; report the original
                    on_fail(spec, getattr(exc, "cause", None) or exc)
                else:
                    on_done(spec, record)
    finally:
        if started:
            ray.shutdown()


def _ray_task(spec: RunSpec, cfg: ExperimentConfig) -> dict:
    _init_worker()
    return execute_run(spec, cfg)


def _failure_message(failed: dict, total: int) -> str:
    shown = [f"{key}: {exc}" if isinstance(exc, IntervgnnError) else f"{key}: {type(exc).__name__}: {exc}"
             for key, exc in list(failed.items())[:5]]
    more = f"; and {len(failed) - 5} more" if len(failed) > 5 else ""
    return (
        f"{len(failed)} of {total} runs failed (the others finished and are saved; fix the cause and "
        f"run again with --resume to do only the rest): " + "; ".join(shown) + more
    )


def run_grid(
    cfg: ExperimentConfig,
    *,
    workers: int | None = None,
    executor: str | None = None,
    address: str | None = None,
    resume: bool = False,
    progress: bool = True,
    log: Callable[[str], None] | None = None,
) -> list[RunSpec]:
    """Run every cell of the grid that is not finished yet; return all run specs.

    Parameters
    ----------
    cfg : ExperimentConfig
    workers, executor : override the config's values.
    address : str, optional
        Address of an existing Ray cluster (``--executor ray``); a local Ray
        instance is started otherwise.
    resume : bool
        Keep finished runs (same digest) and run only the others; without
        it every run is done afresh.
    progress : bool
        Show a progress bar over runs.

    Raises
    ------
    RunError
        Some runs failed; every other run was still done and saved, so a
        ``resume=True`` call does only the failed ones.
    """
    workers = cfg.workers if workers is None else workers
    executor = executor or cfg.executor
    if executor not in ("local", "ray"):
        raise ConfigError(f"unknown executor '{executor}'; executors are: local, ray")
    if isinstance(workers, bool) or not isinstance(workers, int) or workers < 1:
        raise ConfigError(f"workers: expected a whole number of at least 1, got {workers!r}")
    if address and executor != "ray":
        raise ConfigError("an address is for the ray executor (--executor ray); the local executor takes none")
    check_networks(cfg)  # before anything is deleted or started
    specs = plan_runs(cfg)
    store = RunStore(cfg.output)
    store.prepare(resume)
    todo = [s for s in specs if not (resume and store.finished(s, run_digest(s, cfg)))]
    if log:
        skipped = len(specs) - len(todo)
        log(f"{len(specs)} runs in the grid; {skipped} already finished, {len(todo)} to run ({executor}, {workers} worker(s))")
    bar = None
    if progress and todo:
        from tqdm.auto import tqdm

        bar = tqdm(total=len(todo), desc="runs", unit="run")

    failed: dict[str, BaseException] = {}

    def on_done(spec: RunSpec, record: dict) -> None:
        store.save(spec, record)
        if bar is not None:
            bar.set_postfix_str(spec.key[-40:])
            bar.update(1)

    def on_fail(spec: RunSpec, exc: BaseException) -> None:
        failed[spec.key] = exc
        if bar is not None:
            bar.set_postfix_str(f"failed: {spec.key[-32:]}")
            bar.update(1)

    try:
        if executor == "local":
            _local(todo, cfg, workers, on_done, on_fail)
        else:
            _ray(todo, cfg, workers, address, on_done, on_fail)
    finally:
        if bar is not None:
            bar.close()
    if failed:
        raise RunError(_failure_message(failed, len(todo)), failed) from next(iter(failed.values()))
    return specs


def load_records(cfg: ExperimentConfig, specs: Iterable[RunSpec]) -> list[dict]:
    store = RunStore(cfg.output)
    return [store.load(s) for s in specs]
