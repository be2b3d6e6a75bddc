"""The contract every estimator keeps."""

from __future__ import annotations

from collections.abc import Mapping, Sequence

import numpy as np

from ..distribution import Distribution, EffectEstimate, Interval, boundary_layers, boundary_values
from ..errors import DataError, IntervgnnError, NotFittedError, QueryError, did_you_mean, shorten
from ..graph import CausalGraph
from ..query import Query, check_seed, check_state, check_variable, make_query
from ..table import Table

__all__ = ["Estimator", "check_fit_inputs", "check_alpha"]


def check_alpha(alpha, allow_auto: bool = False) -> None:
    """Raise DataError unless ``alpha`` is a non-negative number (or ``"auto"`` where allowed)."""
    if allow_auto and alpha == "auto":
        return
    import sys

    # NaN, infinity and whole numbers beyond the largest float are refused: each breaks every answer
    if isinstance(alpha, bool) or not isinstance(alpha, (int, float)) or not 0 <= alpha <= sys.float_info.max:
        expected = "a non-negative number or 'auto'" if allow_auto else "a non-negative number"
        raise DataError(f"alpha must be {expected}, got {shorten(repr(alpha))}")


def check_fit_inputs(table: Table, graph: CausalGraph) -> Table:
    """Check that ``table`` has exactly the graph's variables; return it with columns in graph order.

    Raises
    ------
    DataError
        A graph variable missing from the data, or a data column not in the graph.
    """
    if not isinstance(table, Table):
        raise DataError(f"fit expects a Table, got {type(table).__name__}")
    if not isinstance(graph, CausalGraph):
        raise DataError(f"fit expects a CausalGraph, got {type(graph).__name__}")
    missing = [v for v in graph.nodes if v not in table.variables]
    if missing:
        raise DataError(f"variable '{missing[0]}' is in the graph but not in the data")
    extra = [v for v in table.variables if v not in graph]
    if extra:
        raise DataError(f"column '{extra[0]}' is in the data but not in the graph")
    if table.n_rows == 0:
        raise DataError("the data have no rows")
    return table if table.variables == graph.nodes else table.select(graph.nodes)


class Estimator:
    """Base class: ``fit(table, graph)`` learns, ``query`` answers, ``effect`` contrasts.

    Estimators keep scikit-learn's contract: ``__init__`` stores each setting
    unchanged under its own name and does nothing else (settings are checked
    in ``fit``); :meth:`get_params` / :meth:`set_params` read and change them,
    so ``sklearn.base.clone`` gives an unfitted copy; ``fit`` validates,
    learns and returns ``self``; learned attributes end in ``_``; a second
    ``fit`` starts from scratch. Subclasses implement :meth:`_answer`; a
    query never changes what was learned and runs no training.
    """

    #: short name used by the harness and the command line
    name = "estimator"

    def fit(self, table: Table, graph: CausalGraph) -> Estimator:  # pragma: no cover - abstract
        raise NotImplementedError

    def _check_settings(self) -> None:
        """Raise an :class:`~intervgnn.errors.IntervgnnError` naming a bad setting.

        ``fit`` calls it first; the harness calls it when it reads a config,
        so that a bad setting stops a sweep before any run starts.
        """

    # ---------------------------------------------------------------- query
    def _check_fitted(self) -> None:
        if not hasattr(self, "states_"):
            raise NotFittedError(f"this {type(self).__name__} is not fitted yet; call fit(table, graph) first")

    def query(
        self,
        target: str | Sequence[str],
        do: Mapping[str, str] | None = None,
        given: Mapping[str, str] | None = None,
    ) -> Distribution:
        """Estimate P(target | do(...), given).

        Raises
        ------
        NotFittedError
            Before ``fit``.
        QueryError
            A name or state that is not a string, an unknown variable or
            state, a variable with two roles, or an answer of more than
            :data:`~intervgnn.query.MAX_ANSWER_ENTRIES` entries (checked
            before any estimator's work starts).
        UnsupportedQuery
            This estimator cannot answer this kind of query.
        """
        self._check_fitted()
        q = make_query(self.states_, target, do, given)  # the one check of names, states and answer size
        probs = self._answer(q)
        return Distribution(
            q.targets, [self.states_[t] for t in q.targets], probs, description=q.describe(), identified=self._identified(q)
        )

    def _answer(self, q: Query):  # pragma: no cover - abstract
        raise NotImplementedError

    def _identified(self, q: Query) -> bool | None:
        """Whether the query is identifiable on the diagram (None: not checked, no hidden common causes)."""
        return None

    def effect(self, outcome: str, treatment: str, a: str, b: str, state: str, given: Mapping[str, str] | None = None) -> float:
        """The contrast P(outcome=state | do(treatment=a)) - P(outcome=state | do(treatment=b)).

        Raises
        ------
        QueryError
            Unknown variable or state.
        """
        self._check_fitted()
        check_state(self.states_, check_variable(self.states_, outcome, "target"), state)
        pa = self.query(outcome, do={treatment: a}, given=given)[state]
        pb = self.query(outcome, do={treatment: b}, given=given)[state]
        return pa - pb

    # ------------------------------------------------------------ intervals
    #: resamples of the rows when an interval is asked without ``draws``
    bootstrap_draws = 50

    def query_interval(
        self,
        target: str | Sequence[str],
        do: Mapping[str, str] | None = None,
        given: Mapping[str, str] | None = None,
        level: float = 0.95,
        draws: int | None = None,
        seed: int = 0,
    ) -> Distribution:
        """P(target | do(...), given) with a central ``level`` interval on every probability.

        The default is the bootstrap: the estimator is refitted on ``draws``
        resamples (with replacement, of the same size) of the rows it was
        fitted on, each refit answers, and the bounds are the quantiles of
        those answers (percentile bootstrap; Efron 1979). The refits are kept
        for the next interval with the same ``draws`` and ``seed``. The
        interval covers the uncertainty from the rows, not the diagram's
        assumptions. The probabilities are :meth:`query`'s.

        Raises
        ------
        QueryError
            As :meth:`query`; a bad ``level``, ``draws`` or ``seed``.
        NotFittedError
            Before ``fit`` (or a model loaded without its rows).
        NotIdentified
            A query that is not identifiable on the diagram has no
            data-driven interval from observational rows (even where the
            estimator answers it from its model's assumptions): the error
            carries the reason (the hedge). Where the fitted rows include
            experimental rows that set exactly the query's ``do`` variables
            to its states, the answer and its interval come from those rows
            alone instead (see :meth:`experimental_answer`); the error is
            raised only where there are none.
        """
        from ..errors import NotIdentified

        try:
            point = self.query(target, do=do, given=given)
            self._refuse_unidentified_interval(target, do, given)
        except NotIdentified:
            arm = self.experimental_answer(target, do=do, given=given, level=level, draws=draws, seed=seed)
            if arm is None:
                raise
            arm.description += " (not identifiable from the observational rows)"
            return arm
        samples = self._interval_samples([(target, do, given)], level, draws, seed)[0]
        include = self._interval_include([(target, do, given)])[0]
        return Distribution(
            point.variables, point.states, point.probs, description=point.description,
            identified=point.identified,
            interval=Interval(level, samples, self._interval_method(), include, estimate=point.probs),
        )

    def effect_interval(
        self,
        outcome: str,
        treatment: str,
        a: str,
        b: str,
        state: str,
        given: Mapping[str, str] | None = None,
        level: float = 0.95,
        draws: int | None = None,
        seed: int = 0,
    ) -> EffectEstimate:
        """The contrast P(outcome=state | do(treatment=a)) - P(outcome=state | do(treatment=b)) with its interval.

        Both answers of every draw come from the same refit (or posterior
        draw), so the interval is the contrast's own. Also gives the share
        of draws above zero and whether the interval excludes zero.

        Raises
        ------
        QueryError
            Unknown variable or state; a bad ``level``, ``draws`` or ``seed``.
        """
        from ..errors import NotIdentified

        self._check_fitted()
        check_state(self.states_, check_variable(self.states_, outcome, "target"), state)
        k = self.states_[outcome].index(state)
        text = f"P({outcome}={state} | do({treatment}={a})) - P({outcome}={state} | do({treatment}={b}))"
        if given:
            text = text.replace(")) -", f"), {', '.join(f'{v}={s}' for v, s in given.items())}) -", 1)
        try:
            estimate = self.effect(outcome, treatment, a, b, state, given=given)
            self._refuse_unidentified_interval(outcome, {treatment: a}, given)
        except NotIdentified:
            arms = [self.experimental_answer(outcome, do={treatment: x}, given=given, level=level, draws=draws,
                                             seed=seed + j) for j, x in enumerate((a, b) if a != b else (a,))]
            if any(arm is None for arm in arms):
                raise
            arms = arms * (3 - len(arms))  # a == b: one arm, the contrast exactly 0 in every draw
            k = arms[0].states[0].index(state)
            pa, pb = (arm.interval.samples[:, k] for arm in arms)
            n = "/".join(str(arm.experimental_rows) for arm in arms)
            include = arms[0].boundary[k] - arms[1].boundary[k]
            estimate = arms[0].probs[k] - arms[1].probs[k]
            return EffectEstimate(f"{text}, from {n} experimental rows alone (not identifiable from observational rows)",
                                  estimate, Interval(level, pa - pb, arms[0].interval.method, include, estimate=estimate))
        pair = [(outcome, {treatment: a}, given), (outcome, {treatment: b}, given)]
        pa, pb = self._interval_samples(pair, level, draws, seed)
        ia, ib = self._interval_include(pair)
        include = None if ia is None or ib is None else ia[0][k] - ib[0][k]  # the counts-only layers
        return EffectEstimate(text, estimate, Interval(level, pa[:, k] - pb[:, k], self._interval_method(), include,
                                                       estimate=estimate))

    def _interval_method(self) -> str:
        return "bootstrap"

    def _interval_include(self, queries) -> list:
        """Per (target, do, given): values the interval's bounds are widened to contain, or None (default: none)."""
        return [None] * len(queries)

    def _counts_only_answers(self, queries, counts: Mapping[str, np.ndarray], rows: Mapping[str, np.ndarray]) -> list:
        """Per query, ``[3, *shape]``: the exact 0s and 1s of the answer that the counts allow, NaN elsewhere.

        ``counts`` are the fitted counts per variable, axes ``(*parents,
        v)``, and ``rows`` the counts-only CPTs made of them
        (:func:`~intervgnn.estimators.plugin.counts_only_rows`: each count
        over its row total, a row never seen uniform). Layer 0 holds the 0s
        and 1s of the answer under the counts-only CPTs.
        Layers 1 and 2 hold every 0 and every 1 that the answer takes when
        the rows of a target variable that were never seen are all put on
        one of its states, for each state in turn: a row never seen leaves
        the likelihood flat, so each of these CPT sets fits the rows as well
        as the counts-only one. None for a query whose evidence has
        probability zero under the counts-only CPTs.

        A probability the counts allow to be exactly 0 or 1 is one no
        posterior draw reaches, since every drawn row is inside the simplex
        (a draw from a sparse prior gets within 1e-10 of it and still misses
        a 0 in the network); the interval's bound is widened to it. This
        follows the x = 0 and x = n part of the modified Jeffreys interval
        for one proportion, whose lower bound is 0 when no success is seen
        and upper bound 1 when no failure is (Brown, Cai & DasGupta 2001,
        Statistical Science 16:101-133; from memory): for a row never seen,
        x = 0 and x = n both hold. Only the target variables' unseen rows are
        varied (a search over every variable's would be combinatorial).
        Elsewhere the bounds are the draws' quantiles. Effect contrasts use
        layer 0 alone (their two arms share the unseen rows).
        """
        from ..errors import ZeroEvidenceError
        from .plugin import unseen_row_variants

        engine = self.network_._engine
        out = []
        for target, do, given in queries:
            q = make_query(self.states_, target, do, given)
            codes = {v: self.states_[v].index(s) for v, s in q.do}
            evidence = {v: self.states_[v].index(s) for v, s in q.given}
            plan = engine.plan(q.targets, tuple(codes), tuple(evidence))
            try:
                arr = engine.query_array_batch(q.targets, {v: rows[v][None] for v in plan.factor_vars}, codes, evidence)
            except ZeroEvidenceError:
                out.append(None)
                continue
            found = [arr[0]]
            fixed = {**codes, **evidence}
            for t in q.targets:
                if t not in plan.factor_vars:
                    continue
                # the rows the answer reads: a parent set by do= or observed by given= fixes its axis
                read = tuple(slice(fixed[p], fixed[p] + 1) if p in fixed else slice(None)
                             for p in self.network_.graph.parents(t))
                if not (counts[t][read].sum(axis=-1) == 0).any():
                    continue
                variants = unseen_row_variants(counts[t], rows[t])
                stack = {v: rows[v][None] for v in plan.factor_vars}  # a batch of one broadcasts against the k
                stack[t] = variants
                try:
                    found.extend(engine.query_array_batch(q.targets, stack, codes, evidence))
                except ZeroEvidenceError:  # the evidence impossible in some variant: try them one by one
                    for j in range(len(variants)):
                        stack[t] = variants[j : j + 1]
                        try:
                            found.append(engine.query_array_batch(q.targets, stack, codes, evidence)[0])
                        except ZeroEvidenceError:
                            pass
            out.append(boundary_layers(found))
        return out

    #: draws from the experimental rows' posterior when an interval is asked without ``draws``
    experimental_draws = 2000

    def experimental_answer(
        self,
        target: str | Sequence[str],
        do: Mapping[str, str] | None = None,
        given: Mapping[str, str] | None = None,
        level: float = 0.95,
        draws: int | None = None,
        seed: int = 0,
    ) -> Distribution | None:
        """P(target | do(...), given) from the fitted rows that ran exactly this experiment, or None.

        The rows counted are those where exactly the ``do`` variables were
        set by intervention (no other variable), each to the query's state,
        and where ``given`` holds. Randomised rows answer a do-query by
        plain counting whatever the hidden causes: this is the answer a
        query that is not identifiable from observational rows can still
        get, and its interval narrows only as such rows accumulate. The
        answer is the posterior mean of the target's joint states under a
        Dirichlet with the Jeffreys prior (1/2 per state); the interval the
        central ``level`` interval of ``draws`` posterior draws (default
        2,000). For one binary target this is the Jeffreys interval for a
        proportion, recommended for its coverage by Brown, Cai & DasGupta
        (2001, Statistical Science 16:101-133; from memory), with the bounds
        widened to 0 or 1 where the counts are (as the posterior intervals
        are, see :meth:`_counts_only_answers`). The returned distribution
        has an ``experimental_rows`` attribute, the number of rows it rests
        on; its ``identified`` is None (the experiment, not the diagram,
        answers it). None where the fitted rows hold no such row (or are
        not kept: a loaded model).

        Raises
        ------
        QueryError
            As :meth:`query`; a bad ``level``, ``draws`` or ``seed``; a query without ``do``.
        """
        self._check_fitted()
        q = make_query(self.states_, target, do, given)
        if not q.do:
            raise QueryError("an experimental answer needs do=: the variables the experiment set")
        self._check_interval_settings(level, draws, seed, least=10)
        found = self._experimental_counts(q)
        if found is None:
            return None
        table, counts = found
        n = int(counts.sum())
        shape = counts.shape
        draws = self.experimental_draws if draws is None else int(draws)
        if draws * counts.size > self._MAX_KEPT_DRAWS:
            raise QueryError(f"{draws:,} draws of an answer of {counts.size:,} entries is too large to hold; "
                             "ask for fewer draws or a smaller target")
        from .plugin import dirichlet_rows

        params = counts.reshape(-1) + 0.5
        samples = dirichlet_rows(np.random.default_rng(check_seed(seed)), params, draws).reshape((draws,) + shape)
        boundary = boundary_values(counts / n)
        mean = (params / params.sum()).reshape(shape)
        out = Distribution(
            q.targets, [table.states[t] for t in q.targets], mean,
            description=f"{q.describe()}, from the {n} experimental rows {self._experiment_text(q)} alone",
            interval=Interval(level, samples, "experimental posterior", boundary, estimate=mean),
        )
        out.experimental_rows = n
        out.boundary = boundary
        return out

    def experimental_rows(self, do: Mapping[str, str], given: Mapping[str, str] | None = None) -> int:
        """How many fitted rows set exactly the ``do`` variables to these states (and have ``given``); 0 if none kept.

        Raises
        ------
        QueryError
            An unknown variable or state.
        """
        self._check_fitted()
        do, given = dict(do or {}), dict(given or {})
        for v, s in list(do.items()) + list(given.items()):
            check_state(self.states_, check_variable(self.states_, v, "do" if v in do else "given"), s)
        if not do:
            return 0
        found = self._experimental_mask(list(do.items()), list(given.items()))
        return 0 if found is None else int(found[1].sum())

    @staticmethod
    def _experiment_text(q: Query) -> str:
        text = "that set " + ", ".join(f"{v}={s}" for v, s in q.do)
        if q.given:
            text += " and have " + ", ".join(f"{v}={s}" for v, s in q.given)
        return text

    def _experimental_mask(self, do_items, given_items):
        """(the fitted table, a row mask: exactly the ``do`` variables set, to their states, ``given`` holding), or None."""
        rows = self.__dict__.get("_fitted_rows")
        if rows is None or not do_items:
            return None
        table = rows[0]
        col = {v: i for i, v in enumerate(table.variables)}
        codes, set_ = table.codes, table.intervened
        do_cols = [col[v] for v, _ in do_items]
        mask = set_[:, do_cols].all(axis=1) & (set_.sum(axis=1) == len(do_cols))
        for v, s in list(do_items) + list(given_items):
            mask &= codes[:, col[v]] == table.states[v].index(s)
        return (table, mask) if mask.any() else None

    def _experimental_counts(self, q: Query):
        """(the fitted table, counts of the target's joint states ``[*shape]``) over the matching rows, or None."""
        found = self._experimental_mask(list(q.do), list(q.given))
        if found is None:
            return None
        table, mask = found
        col = {v: i for i, v in enumerate(table.variables)}
        shape = tuple(len(table.states[t]) for t in q.targets)
        cells = np.ravel_multi_index(tuple(table.codes[mask, col[t]] for t in q.targets), shape)
        return table, np.bincount(cells, minlength=int(np.prod(shape))).astype(np.float64).reshape(shape)

    def _refuse_unidentified_interval(self, target, do, given) -> None:
        q = make_query(self.states_, target, do, given)
        if self._identified(q) is False:
            from ..errors import NotIdentified

            raise NotIdentified(self.identification(q))

    @staticmethod
    def _check_interval_settings(level, draws, seed, least: int = 20) -> None:
        if isinstance(level, bool) or not isinstance(level, (int, float)) or not 0 < level < 1:
            raise QueryError(f"level must be a number between 0 and 1, got {level!r}")
        if draws is not None and (isinstance(draws, bool) or not isinstance(draws, (int, np.integer))
                                  or not least <= draws <= 100_000):
            raise QueryError(f"draws must be a whole number from {least} to 100,000, got {draws!r}")
        check_seed(seed)

    def _interval_samples(self, queries, level, draws, seed) -> list[np.ndarray]:
        """For each (target, do, given): the answers of every bootstrap refit, ``[draws, *shape]``."""
        self._check_interval_settings(level, draws, seed, least=10)
        refits = self._bootstrap(self.bootstrap_draws if draws is None else int(draws), seed)
        return [np.stack([m.query(t, do=d, given=g).probs for m in refits]) for t, d, g in queries]

    #: the most CPT entries times draws kept between interval answers (2^25 floats, 256 MiB)
    _MAX_KEPT_DRAWS = 2**25

    def _posterior_answers(self, queries, draws: int, seed: int, draw_cpt) -> list[np.ndarray]:
        """Answers of ``draws`` CPT sets drawn by ``draw_cpt(rng, v, draws) -> [draws, *cpt shape]``.

        Every CPT is drawn, in the network's order (so a seed gives the same
        draws whatever is asked), once per ``(draws, seed)``: the draws are
        kept for the next interval, which then costs one batched contraction
        of the CPTs it uses. A network too large to keep its draws (over
        2^25 entries times draws) draws only the CPTs each answer uses.
        """
        engine = self.network_._engine
        shaped = []
        for target, do, given in queries:
            q = make_query(self.states_, target, do, given)
            shaped.append((q, {v: self.states_[v].index(s) for v, s in q.do},
                           {v: self.states_[v].index(s) for v, s in q.given}))
        needed = []
        for q, codes, evidence in shaped:
            for v in engine.plan(q.targets, tuple(codes), tuple(evidence)).factor_vars:
                if v not in needed:
                    needed.append(v)
        kept = self.__dict__.get("_posterior_draws_kept")
        if kept is not None and kept[0] is self.network_ and kept[1] == (draws, seed):
            batch = kept[2]
        else:
            rng = np.random.default_rng(check_seed(seed))
            nodes = list(self.network_.graph.nodes)
            size = sum(engine.cpts[v].size for v in nodes) * draws
            if size <= self._MAX_KEPT_DRAWS:
                batch = {v: draw_cpt(rng, v, draws) for v in nodes}
                self._posterior_draws_kept = (self.network_, (draws, seed), batch)
            else:
                batch = {v: draw_cpt(rng, v, draws) for v in needed}
        batch = {v: batch[v] for v in needed}
        return [engine.query_array_batch(q.targets, batch, codes, evidence) for q, codes, evidence in shaped]

    def _keep_fitted_rows(self, table, graph) -> None:
        """Keep the rows and the settings of this fit: bootstrap refits resample the one with the other."""
        self._fitted_rows = (table, graph, self.get_params(deep=False))

    def _bootstrap(self, draws: int, seed: int) -> list:
        self._check_fitted()
        rows = self.__dict__.get("_fitted_rows")
        if rows is None:
            raise NotFittedError(
                f"this {type(self).__name__} has no rows to resample (a loaded model: load it with its rows, "
                "table=..., or fit it again)"
            )
        cached = self.__dict__.get("_bootstrap_refits")
        if cached is not None and cached[0] is rows and cached[1] == (draws, seed):
            return cached[2]
        table, graph, params = rows  # the settings of the fit, not the current ones (set_params needs a refit)
        rng = np.random.default_rng(check_seed(seed))
        refits = []
        for b in range(draws):
            settings = dict(params)
            if "seed" in settings:  # each refit its own seed, derived from the estimator's
                settings["seed"] = int(rng.integers(2**31))
            if "progress" in settings:
                settings["progress"] = False
            refit = type(self)(**settings)
            refits.append(refit.fit(table.take(rng.integers(0, table.n_rows, table.n_rows)), graph))
        self._bootstrap_refits = (rows, (draws, seed), refits)
        return refits

    def __repr__(self) -> str:
        settings = ", ".join(f"{k}={v!r}" for k, v in self.get_params(deep=False).items())
        return f"{type(self).__name__}({settings})"

    # ------------------------------------------------- scikit-learn contract
    @classmethod
    def _param_names(cls) -> tuple[str, ...]:
        """The settings: the names of ``__init__``'s parameters, in signature order."""
        import inspect

        params = inspect.signature(cls.__init__).parameters.values()
        return tuple(p.name for p in params if p.name != "self" and p.kind not in (p.VAR_POSITIONAL, p.VAR_KEYWORD))

    def get_params(self, deep: bool = True) -> dict:
        """The settings given to ``__init__``, by name (the scikit-learn contract).

        Parameters
        ----------
        deep : bool, default True
            Also list the settings of a setting that is itself an estimator
            (a scikit-learn classifier), as ``setting__name``.

        Returns
        -------
        dict
            Each setting exactly as stored; ``sklearn.base.clone`` builds an
            unfitted copy from it.
        """
        out = {}
        for key in self._param_names():
            value = getattr(self, key)
            if deep and hasattr(value, "get_params") and not isinstance(value, type):
                out.update((f"{key}__{k}", v) for k, v in value.get_params().items())
            out[key] = value
        return out

    def set_params(self, **params) -> Estimator:
        """Change settings by name; ``setting__name`` reaches into a setting that is an estimator.

        The new values are checked by the next ``fit`` (as the constructor's
        are). Learned state is kept until then.

        Returns
        -------
        self

        Raises
        ------
        DataError
            A name that is not a setting of this estimator (the message
            lists the settings), or a nested name the inner estimator refuses.
        """
        valid = self._param_names()
        nested: dict[str, dict] = {}
        for key, value in params.items():
            name, sep, inner = key.partition("__")
            if name not in valid:
                raise DataError(
                    f"unknown setting '{shorten(key)}' for {type(self).__name__}{did_you_mean(name, valid)}; "
                    f"settings are: {', '.join(valid)}"
                )
            if sep:
                nested.setdefault(name, {})[inner] = value
            else:
                setattr(self, name, value)
        for name, inner in nested.items():
            target = getattr(self, name)
            if not hasattr(target, "set_params") or isinstance(target, type):
                raise DataError(f"setting '{name}' is not an estimator, so '{name}__...' cannot be set")
            try:
                target.set_params(**inner)
            except IntervgnnError:
                raise
            except (ValueError, TypeError, AttributeError) as exc:
                raise DataError(f"setting '{name}' refused {', '.join(sorted(inner))}: {shorten(exc)}") from None
        return self

    def _clear_fitted(self) -> None:
        """Drop what a previous ``fit`` learned (attributes ending in ``_``), so a new fit starts clean."""
        for key in [k for k in vars(self) if k.endswith("_") and not k.startswith("__")]:
            delattr(self, key)


class ChecksIdentification:
    """For estimators that read a diagram with hidden common causes: identify each do-query's shape once.

    The estimator sets ``graph_`` and an empty ``_identifications`` dict in ``fit``.
    """

    def identification(self, q: Query):
        """Identification of the query's shape on the diagram (cached; None without hidden common causes or ``do=``)."""
        if not self.graph_.has_hidden_confounding or not q.do:
            return None
        key = (q.targets, tuple(sorted(v for v, _ in q.do)), tuple(sorted(v for v, _ in q.given)))
        if key not in self._identifications:
            from ..identify import identify

            self._identifications[key] = identify(self.graph_, list(q.targets), list(key[1]), list(key[2]))
        return self._identifications[key]

    def _identified(self, q: Query) -> bool | None:
        ident = self.identification(q)
        return None if ident is None else ident.identifiable
