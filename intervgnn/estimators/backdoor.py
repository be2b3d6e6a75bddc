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

    The parents of the treatment block every back-door path in a causal DAG
    without hidden variables, so they are a valid adjustment set. The
    outcome model :math:`P(y \mid x, z)` is a scikit-learn classifier on
    one-hot features of x and z plus their x-by-z interactions, trained on
    the rows where Y was not intervened; the sum over z averages its
    predictions over the observational rows.

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

    def _outcome_model(self, x: str, y: str):
        key = (x, y)
        if key not in self.outcome_models_:
            t = self.table_
            col = {v: j for j, v in enumerate(t.variables)}
            zs = list(self.graph_.parents(x))
            use = ~t.intervened[:, col[y]]
            codes = t.codes[use]
            feats = self._features(codes[:, col[x]], codes[:, [col[z] for z in zs]], x, zs)
            target = codes[:, col[y]]
            if np.unique(target).size == 1:
                model = ("constant", int(target[0]))
            else:
                clf = self._new_classifier().fit(feats, target)
                model = ("classifier", clf)
            obs = t.codes[~t.intervened.any(axis=1)]
            if obs.shape[0] == 0:
                obs = t.codes
            zc = obs[:, [col[z] for z in zs]]
            if zs:
                uniq, counts = np.unique(zc, axis=0, return_counts=True)
            else:
                uniq, counts = np.zeros((1, 0), dtype=np.int64), np.array([obs.shape[0]])
            self.outcome_models_[key] = (model, zs, uniq, counts / counts.sum())
        return self.outcome_models_[key]

    def _answer(self, q: Query):
        if len(q.targets) != 1 or len(q.do) != 1 or q.given:
            raise UnsupportedQuery(
                "back-door adjustment answers P(Y | do(X=x)) for one treatment and one target, without given="
            )
        (y,), ((x, xs),) = q.targets, q.do
        k = len(self.states_[y])
        col = {v: j for j, v in enumerate(self.table_.variables)}
        if y not in self.graph_.descendants(x):
            # Y is not affected by X: P(y | do(x)) = P(y), read off the rows where Y was not set
            t = self.table_
            vals = t.codes[~t.intervened[:, col[y]], col[y]]
            counts = np.bincount(vals, minlength=k).astype(np.float64)
            return counts / max(counts.sum(), 1.0)
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
