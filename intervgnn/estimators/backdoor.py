"""Back-door adjustment with a scikit-learn classifier."""

from __future__ import annotations

import numpy as np

from ..errors import DataError, UnsupportedQuery, did_you_mean
from ..graph import CausalGraph
from ..query import Query
from ..table import Table
from .base import Estimator, check_fit_inputs

__all__ = ["BackdoorEstimator"]


def _named_classifier(name: str):
    from sklearn.ensemble import GradientBoostingClassifier, RandomForestClassifier
    from sklearn.linear_model import LogisticRegression
    from sklearn.naive_bayes import BernoulliNB

    return {
        "logistic": lambda: LogisticRegression(max_iter=2000),
        "random_forest": lambda: RandomForestClassifier(n_estimators=100, min_samples_leaf=5, random_state=0),
        "gradient_boosting": lambda: GradientBoostingClassifier(random_state=0),
        "naive_bayes": lambda: BernoulliNB(),
    }[name]()


CLASSIFIERS = ("logistic", "random_forest", "gradient_boosting", "naive_bayes")


class BackdoorEstimator(Estimator):
    r"""P(Y = y | do(X = x)) by back-door adjustment over the treatment's parents.

    .. math::
        P(y \mid do(x)) = \sum_z P(y \mid x, z)\, P(z),
        \qquad Z = \mathrm{pa}(X)

    The parents of the treatment block every back-door path when no hidden
    common cause touches the treatment, so they are a valid adjustment set
    (Pearl 2009, Sec. 3.3). When the diagram has a bidirected edge at the
    treatment, a set satisfying the back-door criterion is searched for
    among the observed variables; if none exists the query raises
    :class:`~intervgnn.errors.UnsupportedQuery`. The outcome model
    :math:`P(y \mid x, z)` is a scikit-learn classifier on one-hot features
    of x and z plus their x-by-z interactions; it and the weights
    :math:`P(z)` are learned from the rows where no variable other than the
    treatment was set by experiment (observational rows and experiments on
    the treatment itself), the rows whose P(y | x, z) and P(z) are those of
    the observational regime.

    Only single-treatment, single-target queries without ``given=`` are
    answered; others raise :class:`~intervgnn.errors.UnsupportedQuery`.

    Parameters
    ----------
    classifier : str or a scikit-learn classifier
        A name, one of ``"logistic"`` (``LogisticRegression(max_iter=2000)``,
        the default), ``"random_forest"``, ``"gradient_boosting"``,
        ``"naive_bayes"``; or any estimator with ``fit`` and
        ``predict_proba`` (cloned for each (treatment, target) pair).

    Notes
    -----
    Outcome models are fitted on first use for each (treatment, target)
    pair and kept; this cache never changes an answer.
    """

    name = "backdoor"

    def __init__(self, classifier="logistic"):
        self.classifier = classifier

    def _check_settings(self) -> None:
        if isinstance(self.classifier, str):
            if self.classifier not in CLASSIFIERS:
                raise DataError(
                    f"unknown classifier '{self.classifier}'{did_you_mean(self.classifier, CLASSIFIERS)}; "
                    f"classifiers are: {', '.join(CLASSIFIERS)} (or pass a scikit-learn classifier)"
                )
        elif not (hasattr(self.classifier, "fit") and hasattr(self.classifier, "predict_proba")):
            raise DataError("classifier must be a name or a scikit-learn classifier with fit and predict_proba")

    def fit(self, table: Table, graph: CausalGraph) -> BackdoorEstimator:
        self._check_settings()
        table = check_fit_inputs(table, graph)
        self.graph_ = graph
        self.states_ = table.states
        self.table_ = table
        self.outcome_models_: dict[tuple[str, str], tuple] = {}
        return self

    def _new_classifier(self):
        if isinstance(self.classifier, str):
            return _named_classifier(self.classifier)
        from sklearn.base import clone

        return clone(self.classifier)

    def _features(self, x_codes: np.ndarray, z_codes: np.ndarray, x: str, zs: list[str]) -> np.ndarray:
        # one-hot treatment, one-hot adjustment variables, and treatment x adjustment-variable
        # interactions: with one adjustment variable the logistic model is saturated (a
        # separate outcome model per treatment arm), so the adjustment is consistent
        tx = np.eye(len(self.states_[x]))[x_codes]
        blocks = [tx]
        for j, z in enumerate(zs):
            zz = np.eye(len(self.states_[z]))[z_codes[:, j]]
            blocks.append(zz)
            blocks.append((tx[:, :, None] * zz[:, None, :]).reshape(len(x_codes), -1))
        return np.concatenate(blocks, axis=1)

    def _adjustment_set(self, x: str, y: str) -> list[str]:
        # without a hidden common cause of X, pa(X) blocks every back-door path;
        # with one (a bidirected edge at X) a valid set must be searched for
        if not self.graph_.spouses(x):
            return list(self.graph_.parents(x))
        from ..identify.api import find_backdoor_set

        found = find_backdoor_set(self.graph_, x, [y])
        if found is None:
            raise UnsupportedQuery(
                f"no back-door adjustment set exists for {x} -> {y} on this diagram (a hidden common cause "
                f"of {x} cannot be adjusted for)"
            )
        return list(found)

    def _usable_rows(self, x: str) -> np.ndarray:
        # rows where nothing but X was set: there P(y | x, z) and P(z) are those of the
        # observational regime (Z holds no descendant of X); an experiment on any other
        # variable changes them
        t = self.table_
        others = np.delete(t.intervened, t.variables.index(x), axis=1)
        use = ~others.any(axis=1)
        if not use.any():
            raise UnsupportedQuery(f"back-door adjustment for do({x}) needs rows where no variable other than {x} was set")
        return t.codes[use]

    def _outcome_model(self, x: str, y: str):
        key = (x, y)
        if key not in self.outcome_models_:
            col = {v: j for j, v in enumerate(self.table_.variables)}
            zs = self._adjustment_set(x, y)
            codes = self._usable_rows(x)
            feats = self._features(codes[:, col[x]], codes[:, [col[z] for z in zs]], x, zs)
            target = codes[:, col[y]]
            if np.unique(target).size == 1:
                model = ("constant", int(target[0]))
            else:
                clf = self._new_classifier().fit(feats, target)
                model = ("classifier", clf)
            zc = codes[:, [col[z] for z in zs]]
            if zs:
                uniq, counts = np.unique(zc, axis=0, return_counts=True)
            else:
                uniq, counts = np.zeros((1, 0), dtype=np.int64), np.array([codes.shape[0]])
            self.outcome_models_[key] = (model, zs, uniq, counts / counts.sum())
        return self.outcome_models_[key]

    def _answer(self, q: Query):
        if len(q.targets) != 1 or len(q.do) != 1 or q.given:
            raise UnsupportedQuery(
                "back-door adjustment answers P(Y | do(X=x)) for one treatment and one target, without given="
            )
        (y,), ((x, xs),) = q.targets, q.do
        k = len(self.states_[y])
        if y not in self.graph_.descendants(x):
            # Y is not affected by X: P(y | do(x)) = P(y)
            vals = self._usable_rows(x)[:, self.table_.variables.index(y)]
            counts = np.bincount(vals, minlength=k).astype(np.float64)
            return counts / counts.sum()
        model, zs, uniq, weights = self._outcome_model(x, y)
        if model[0] == "constant":
            out = np.zeros(k)
            out[model[1]] = 1.0
            return out
        clf = model[1]
        x_code = self.states_[x].index(xs)
        feats = self._features(np.full(uniq.shape[0], x_code), uniq, x, zs)
        proba = clf.predict_proba(feats)
        full = np.zeros((uniq.shape[0], k))
        full[:, np.asarray(clf.classes_, dtype=np.int64)] = proba
        out = weights @ full
        return out / out.sum()
