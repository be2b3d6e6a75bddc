"""Back-door adjustment with a scikit-learn classifier."""

from __future__ import annotations

import numpy as np

from ..errors import DataError, UnsupportedQuery, did_you_mean, short_repr, shorten
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
    pairs : list of (treatment, target), optional
        The pairs whose outcome models ``fit`` trains. None (default): every
        pair whose target is a descendant of the treatment, which is every
        query this estimator answers; that is one classifier per pair, so
        on a large diagram listing the pairs to be asked saves most of the
        fitting time. A query on a pair not listed raises
        :class:`~intervgnn.errors.UnsupportedQuery`.

    Notes
    -----
    ``fit`` does all the learning: the adjustment set and the outcome model
    of every pair, and the weights :math:`P(z)`. A query only evaluates the
    fitted classifier on the adjustment strata (no training). A target that
    is not a descendant of the treatment is answered by its frequencies
    among the treatment's usable rows, counted in ``fit`` for every
    variable.
    """

    name = "backdoor"

    def __init__(self, classifier="logistic", pairs=None):
        self.classifier = classifier
        self.pairs = pairs

    def _check_settings(self) -> None:
        if isinstance(self.classifier, str):
            if self.classifier not in CLASSIFIERS:
                raise DataError(
                    f"unknown classifier '{self.classifier}'{did_you_mean(self.classifier, CLASSIFIERS)}; "
                    f"classifiers are: {', '.join(CLASSIFIERS)} (or pass a scikit-learn classifier)"
                )
        elif not (hasattr(self.classifier, "fit") and hasattr(self.classifier, "predict_proba")):
            raise DataError("classifier must be a name or a scikit-learn classifier with fit and predict_proba")
        self._check_pairs()

    def _check_pairs(self, graph: CausalGraph | None = None) -> list[tuple[str, str]]:
        """The ``pairs`` setting as a list of (treatment, target); with ``graph``, their names are checked too."""
        if self.pairs is None:
            return []
        if isinstance(self.pairs, (str, bytes)) or not isinstance(self.pairs, (list, tuple)):
            raise DataError(f"pairs must be a list of (treatment, target) pairs, got {short_repr(self.pairs)}")
        out = []
        for i, item in enumerate(self.pairs):
            if (isinstance(item, (str, bytes)) or not isinstance(item, (list, tuple)) or len(item) != 2
                    or not all(isinstance(v, str) for v in item)):
                raise DataError(
                    f"pairs[{i}] must be a (treatment, target) pair of variable names, got {short_repr(item)}"
                )
            x, y = item
            if x == y:
                raise DataError(f"pairs[{i}] names '{shorten(x)}' as both treatment and target")
            if graph is not None:
                for v in (x, y):
                    if v not in graph:
                        raise DataError(
                            f"pairs[{i}]: '{shorten(v)}' is not a variable of the graph{did_you_mean(v, graph.nodes)}"
                        )
            out.append((x, y))
        return out

    def fit(self, table: Table, graph: CausalGraph) -> BackdoorEstimator:
        """Find the adjustment sets and train the outcome model of every pair; count the usable rows' frequencies.

        Raises
        ------
        DataError
            A bad setting, a pair naming a variable not in the graph, or data
            that do not match the graph.
        """
        self._check_settings()
        table = check_fit_inputs(table, graph)
        listed = self._check_pairs(graph)
        self._clear_fitted()
        self.graph_ = graph
        self.states_ = table.states
        if self.pairs is None:
            pairs = [(x, y) for x in graph.nodes for y in graph.descendants(x)]
        else:
            pairs = list(dict.fromkeys((x, y) for x, y in listed if y in graph.descendants(x)))
        usable = {x: self._usable_rows(table, x) for x in graph.nodes}
        # frequencies of every variable among each treatment's usable rows (targets that are not descendants);
        # the treatments with no experiment of their own share those of the observational rows
        plain = ~table.intervened.any(axis=1)

        def frequencies(use):
            return {y: np.bincount(table.codes[use, j], minlength=len(self.states_[y])).astype(np.float64)
                    for j, y in enumerate(table.variables)}

        shared = frequencies(plain) if plain.any() else None
        self.marginals_ = {
            x: shared if np.array_equal(use, plain) else frequencies(use) for x, use in usable.items() if use.any()
        }
        self.outcome_models_: dict[tuple[str, str], tuple] = {}
        self.refusals_: dict[tuple[str, str], str] = {}
        for x, y in pairs:
            try:
                self.outcome_models_[(x, y)] = self._outcome_model(table, usable[x], x, y)
            except UnsupportedQuery as exc:
                self.refusals_[(x, y)] = str(exc)
        self._keep_fitted_rows(table, graph)  # for bootstrap intervals
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

    @staticmethod
    def _usable_rows(table: Table, x: str) -> np.ndarray:
        # rows where nothing but X was set: there P(y | x, z) and P(z) are those of the
        # observational regime (Z holds no descendant of X); an experiment on any other
        # variable changes them
        intervened = table.intervened
        n_set = intervened.sum(axis=1)
        return (n_set == 0) | ((n_set == 1) & intervened[:, table.variables.index(x)])

    @staticmethod
    def _no_rows(x: str) -> UnsupportedQuery:
        return UnsupportedQuery(f"back-door adjustment for do({x}) needs rows where no variable other than {x} was set")

    def _outcome_model(self, table: Table, use: np.ndarray, x: str, y: str) -> tuple:
        """Train P(y | x, z) on the usable rows; return (model, adjustment set, strata of z, their weights)."""
        col = {v: j for j, v in enumerate(table.variables)}
        zs = self._adjustment_set(x, y)
        if not use.any():
            raise self._no_rows(x)
        codes = table.codes[use]
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
        return model, zs, uniq, counts / counts.sum()

    def _answer(self, q: Query):
        if len(q.targets) != 1 or len(q.do) != 1 or q.given:
            raise UnsupportedQuery(
                "back-door adjustment answers P(Y | do(X=x)) for one treatment and one target, without given="
            )
        (y,), ((x, xs),) = q.targets, q.do
        k = len(self.states_[y])
        if y not in self.graph_.descendants(x):
            # Y is not affected by X: P(y | do(x)) = P(y)
            if x not in self.marginals_:
                raise self._no_rows(x)
            counts = self.marginals_[x][y]
            return counts / counts.sum()
        if (x, y) in self.refusals_:
            raise UnsupportedQuery(self.refusals_[(x, y)])
        if (x, y) not in self.outcome_models_:
            raise UnsupportedQuery(
                f"no outcome model was fitted for {x} -> {y}: it is not in this estimator's pairs; "
                "list it there (or leave pairs=None for every pair) and fit again"
            )
        model, zs, uniq, weights = self.outcome_models_[(x, y)]
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
