"""Running the grid: in this process, in a local process pool, or on Ray; each finished run saved at once."""

from __future__ import annotations

import glob
import json
import os
import signal
import threading
from collections.abc import Callable, Iterable

from .._io import atomic_open, make_folder, remove_stale_temps
from ..errors import ConfigError, IntervgnnError, RunError, WriteError
from .config import ExperimentConfig
from .runs import FORMAT, RunSpec, check_networks, execute_run, plan_runs, run_digest

__all__ = ["RunStore", "run_grid", "RunsInterrupted"]


class RunsInterrupted(KeyboardInterrupt):
    """The sweep was interrupted (Ctrl-C); the runs finished so far are saved.

    A :class:`KeyboardInterrupt`, so code that stops on Ctrl-C still does;
    ``finished`` and ``total`` count the grid's runs kept on disk (those a
    resume skips) and its planned runs.
    """

    def __init__(self, finished: int, total: int):
        self.finished, self.total = finished, total
        super().__init__(
            f"interrupted: {finished} of {total} runs finished and kept; run the same command with --resume "
            f"to do the other {total - finished}"
        )


class RunStore:
    """One JSON file per finished run under ``<output>/runs/``, each written atomically."""

    def __init__(self, output: str):
        self.folder = os.path.join(output, "runs")

    def path(self, spec: RunSpec) -> str:
        return os.path.join(self.folder, spec.key + ".json")

    def prepare(self, resume: bool) -> None:
        make_folder(self.folder)
        # temporary files of a run that was killed while being written
        remove_stale_temps(self.folder)
        # and those of intervgnn 0.2 and earlier, named .<run>.json.<random>.tmp
        stale = glob.glob(os.path.join(glob.escape(self.folder), ".*.json.*.tmp"))
        stale += [] if resume else glob.glob(os.path.join(glob.escape(self.folder), "*.json"))
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

    # Ctrl-C reaches the whole process group; the main process alone answers
    # it (it stops the workers), so a worker neither dies with a traceback
    # nor turns the interrupt into one failed run and takes the next
    signal.signal(signal.SIGINT, signal.SIG_IGN)
    torch.set_num_threads(1)


def _stop_pool(pool) -> None:
    """Cancel the queued runs and end the workers now (their running runs are lost, to be done on resume)."""
    # the pool has no public way to end its workers; without it the interpreter's
    # exit would wait for the running runs
    processes = list((getattr(pool, "_processes", None) or {}).values())
    pool.shutdown(wait=False, cancel_futures=True)
    for proc in processes:
        proc.terminate()
    for proc in processes:
        proc.join(timeout=5)
        if proc.is_alive():
            proc.kill()
            proc.join(timeout=5)


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
    # the workers start with Ctrl-C ignored (a spawned Python keeps an ignored
    # SIGINT), so one pressed while they import cannot print a traceback
    main = threading.current_thread() is threading.main_thread()
    pool, futures, handled = None, {}, set()
    try:
        previous = signal.signal(signal.SIGINT, signal.SIG_IGN) if main else None
        try:
            pool = ProcessPoolExecutor(max_workers=workers, mp_context=mp.get_context("spawn"), initializer=_init_worker)
            for spec in todo:
                futures[pool.submit(execute_run, spec, cfg)] = spec
        finally:
            if main and previous is not None:
                signal.signal(signal.SIGINT, previous)
        for fut in as_completed(futures):
            try:
                record = fut.result()
            except Exception as exc:
                on_fail(futures[fut], exc)
            else:
                on_done(futures[fut], record)
            # only now: a record whose saving Ctrl-C broke off is saved again below
            handled.add(fut)
    except BaseException:
        # Ctrl-C (or a record that cannot be saved): keep what has finished, drop the rest
        if pool is not None:
            _stop_pool(pool)
        for fut, spec in futures.items():
            if fut not in handled and fut.done() and not fut.cancelled() and fut.exception() is None:
                try:
                    on_done(spec, fut.result())
                except Exception:
                    break
        raise
    pool.shutdown(wait=True)


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
        try:
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
        except BaseException:
            # Ctrl-C: the queued and running tasks are not wanted any more (on a cluster too)
            for ref in pending:
                try:
                    ray.cancel(ref, force=True)
                except Exception:
                    pass
            raise
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
    RunsInterrupted
        Ctrl-C (a :class:`KeyboardInterrupt`): the queued runs are cancelled
        and the workers stopped; the finished runs are saved, so a
        ``resume=True`` call does only the rest.
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
    # temporary files that a killed sweep left in the folders it writes (the runs
    # folder's went with prepare): the summaries and report, and the plots
    for folder in (cfg.output, os.path.join(cfg.output, "plots")):
        remove_stale_temps(folder)
    digests = {s.key: run_digest(s, cfg) for s in specs}
    todo = [s for s in specs if not (resume and store.finished(s, digests[s.key]))]
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
    except KeyboardInterrupt:
        # the records are read back as a resume reads them, so the count is exactly what a resume
        # keeps: not a count of the saves that returned (Ctrl-C can land between a record's rename
        # and the end of its save) nor of records whose digest is not this sweep's
        kept = len(specs) - len(todo) + sum(store.finished(s, digests[s.key]) for s in todo)
        raise RunsInterrupted(kept, len(specs)) from None
    finally:
        if bar is not None:
            bar.close()
    if failed:
        raise RunError(_failure_message(failed, len(todo)), failed) from next(iter(failed.values()))
    return specs


def load_records(cfg: ExperimentConfig, specs: Iterable[RunSpec]) -> list[dict]:
    store = RunStore(cfg.output)
    return [store.load(s) for s in specs]
