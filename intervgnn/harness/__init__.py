"""Config-driven evaluation: grids of runs, executors, stored results, summaries and reports."""

from .config import EstimatorSpec, ExperimentConfig, NetworkSpec, load_config, parse_config
from .executors import RunStore, load_records, run_grid
from .registry import ESTIMATORS, make_estimator
from .runs import RunSpec, execute_run, plan_runs
from .summary import SUMMARY_COLUMNS, summarise, write_outputs

__all__ = [
    "ExperimentConfig",
    "NetworkSpec",
    "EstimatorSpec",
    "load_config",
    "parse_config",
    "RunSpec",
    "plan_runs",
    "execute_run",
    "RunStore",
    "run_grid",
    "load_records",
    "ESTIMATORS",
    "make_estimator",
    "summarise",
    "write_outputs",
    "SUMMARY_COLUMNS",
    "run_experiment",
]


def run_experiment(cfg, *, workers=None, executor=None, address=None, resume=False, progress=True, log=None):
    """Run (or resume) a whole sweep and write all outputs; returns the output paths."""
    specs = run_grid(cfg, workers=workers, executor=executor, address=address, resume=resume, progress=progress, log=log)
    return write_outputs(cfg, load_records(cfg, specs))
