"""Estimators the harness can run, by name."""

from __future__ import annotations

import inspect

from ..errors import ConfigError, IntervgnnError, did_you_mean, short_repr

__all__ = ["ESTIMATORS", "make_estimator", "check_settings"]


def _naive(**kw):
    from ..estimators.naive import NaiveEstimator

    return NaiveEstimator(**kw)


def _plugin(**kw):
    from ..estimators.plugin import PluginEstimator

    return PluginEstimator(**kw)


def _backdoor(**kw):
    from ..estimators.backdoor import BackdoorEstimator

    return BackdoorEstimator(**kw)


def _estimand(**kw):
    from ..estimators.estimand import EstimandEstimator

    return EstimandEstimator(**kw)


def _neural(**kw):
    from ..estimators.neural import NeuralEstimator

    return NeuralEstimator(**kw)


def _neural_ablation(**kw):
    from ..estimators.neural import NeuralEstimator

    return NeuralEstimator(**{**kw, "cut": False})


def _classes():
    from ..estimators.backdoor import BackdoorEstimator
    from ..estimators.estimand import EstimandEstimator
    from ..estimators.naive import NaiveEstimator
    from ..estimators.neural import NeuralEstimator
    from ..estimators.plugin import PluginEstimator

    return {
        "naive": NaiveEstimator,
        "plugin": PluginEstimator,
        "backdoor": BackdoorEstimator,
        "estimand": EstimandEstimator,
        "neural": NeuralEstimator,
        "neural_ablation": NeuralEstimator,
    }


#: name -> factory(**settings)
ESTIMATORS = {
    "naive": _naive,
    "plugin": _plugin,
    "backdoor": _backdoor,
    "estimand": _estimand,
    "neural": _neural,
    "neural_ablation": _neural_ablation,
}

#: settings the harness sets itself, and where they come from
_RESERVED = {
    "seed": "seeds come from 'seeds'",
    "progress": "the sweep shows one progress bar",
    "device": "runs use the CPU",
    "threads": "each run uses one thread; run several at once with 'workers'",
}


def check_settings(where: str, kind: str, settings: dict) -> None:
    """Raise ConfigError for an unknown setting (with the nearest), a value of the wrong type, or one the estimator refuses."""
    cls = _classes()[kind]
    params = {k: p for k, p in inspect.signature(cls.__init__).parameters.items() if k != "self"}
    if kind == "neural_ablation":
        params.pop("cut", None)
    for key, value in settings.items():
        if not isinstance(key, str):
            raise ConfigError(f"{where}: setting names must be text, got {short_repr(key)}")
        if key in _RESERVED:
            raise ConfigError(f"{where}: '{key}' is set by the harness ({_RESERVED[key]})")
        if key not in params:
            raise ConfigError(
                f"{where}: unknown setting {short_repr(key)}{did_you_mean(key, params)}; settings are: {', '.join(params)}"
            )
        default = params[key].default
        if default is inspect.Parameter.empty or default is None or value is None:
            continue
        expected = type(default)
        ok = isinstance(value, expected) and not (expected is not bool and isinstance(value, bool))
        if expected is float and isinstance(value, int) and not isinstance(value, bool):
            ok = True
        if expected is str and key == "alpha" and isinstance(value, (int, float)):
            ok = True
        if not ok:
            raise ConfigError(f"{where}.{key}: expected {expected.__name__}, got {short_repr(value)}")
    # the values themselves (ranges, names) are checked by the estimator, as fit would
    try:
        make_estimator(kind, settings, seed=0)._check_settings()
    except IntervgnnError as exc:
        message = str(exc)
        # a message about one setting ("lr must be above 0, got -1") gets its key path:
        # estimators[1].neural.lr must be above 0, got -1
        sep = "." if message.split(" ", 1)[0] in params else ": "
        raise ConfigError(f"{where}{sep}{message}") from None


def make_estimator(kind: str, settings: dict, seed: int):
    """A fresh estimator of the registry ``kind`` with ``settings`` and the run's seed."""
    settings = dict(settings)
    cls = _classes()[kind]
    if "seed" in inspect.signature(cls.__init__).parameters:
        settings["seed"] = seed
    return ESTIMATORS[kind](**settings)
