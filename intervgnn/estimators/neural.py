"""Neural estimator: the interventional VGAE trained on sufficient statistics, answering do-queries."""

from __future__ import annotations

import contextlib
import copy
import hashlib
import io
import json
import os
import re
from collections.abc import Mapping

import numpy as np
import torch

from .._io import atomic_open, make_folder
from ..bn.network import CausalNetwork
from ..errors import CheckpointError, DataError, IntervgnnError, NotIdentified, QueryError, short_repr, shorten
from ..graph import CausalGraph
from ..models.answer import conditionals, monte_carlo, table_rows_needed, tabulate_cpts
from ..models.shrinkage import Mixture, mixture_rows, mixture_weights
from ..models.stats import MAX_FAMILY_CELLS, FamilyCells, GroupCells, config_index, count_cells
from ..models.replicas import stack_models, unstack_models
from ..models.training import init_output_bias, train_replicas, train_vgae
from ..models.vgae import FamilyBatch, InterventionalVGAE, family_edges
from ..query import Query, check_seed
from ..table import Table
from .base import ChecksIdentification, Estimator, check_fit_inputs
from .plugin import RowPriors

__all__ = ["NeuralEstimator", "NotIdentified", "WEIGHTS_FILE", "META_FILE", "CHECKPOINT_FORMAT"]

WEIGHTS_FILE = "weights.pt"
META_FILE = "model.json"
#: format tag of ``model.json``
CHECKPOINT_FORMAT = "intervgnn-neural-3"
#: largest ``model.json`` read, in bytes (a description takes well under a kilobyte per variable)
MAX_META_BYTES = 64 * 2**20
#: the fields of ``model.json``, each required
_META_FIELDS = ("format", "package_version", "estimator", "nodes", "edges", "confounded", "states", "settings",
                "models", "rows", "weights_sha256", "sha256")
_MODES = ("auto", "exact", "monte_carlo")


def _seed(*parts: int) -> int:
    """A 31-bit seed derived from integers (numpy's SeedSequence: independent streams per part)."""
    return int(np.random.SeedSequence([int(p) for p in parts]).generate_state(1)[0] & 0x7FFFFFFF)


@contextlib.contextmanager
def torch_threads(threads: int | None):
    """Run a block with ``threads`` torch threads (None: one), restoring the previous count after.

    One thread is the default: training runs many small operations, where
    extra threads only add synchronisation, and on a machine busy with other
    work two threads were measured five times slower than one.
    """
    old = torch.get_num_threads()
    torch.set_num_threads(int(threads or 1))
    try:
        yield
    finally:
        torch.set_num_threads(old)


class NeuralEstimator(ChecksIdentification, Estimator):
    """Answer do-queries with interventional VGAEs trained on the rows' sufficient statistics.

    ``fit`` counts the distinct family configurations of the rows once (an
    intervened node's value is not counted for its own mechanism) and trains
    the VGAE on them with the intervention-aware ELBO, full-batch: the cost
    of training does not grow with the number of rows.

    Each CPT row is then the posterior mean of the counts under a Dirichlet
    prior centred on the decoder's conditional (see
    :mod:`intervgnn.models.shrinkage`): the decoder shares strength across
    parent configurations where rows are few, the counts take over where
    they are many. How much each node trusts the decoder is decided by
    cross-fitted held-out likelihood: the rows are split into ``folds``,
    one model is trained without each fold, and each fold's rows are scored
    with the model that did not see them. The counts-only answer (the
    plug-in estimator's) keeps ``prior_counts`` of the prior weight, so the
    decoder must earn its weight on held-out rows.

    With hidden common causes (a diagram with bidirected edges) one more
    model is trained on all rows, with one shared discrete latent per
    confounded component; it supplies the components' mechanisms and
    latents, which counts cannot (the latent is never observed).

    Queries are answered in *exact* mode (the CPTs above, then exact
    variable elimination) when every node has at most ``max_table_rows``
    parent configurations, and in *Monte Carlo* mode (ancestral sampling
    through the mutilated graph with the same conditionals computed on the
    fly, likelihood weighting for evidence) otherwise; ``mode`` forces one.

    Parameters
    ----------
    dim, hidden, z_dim, num_layers, encoder_hidden : int
        Model size (see :class:`~intervgnn.models.InterventionalVGAE`).
    steps : int
        Full-batch Adam steps per cross-fitted model.
    lr, weight_decay : float
        Adam's settings; the learning rate follows a cosine to zero.
    latent_steps, latent_lr, latent_restarts : int, float, int
        Steps and learning rate of the model with hidden-cause latents
        (diagrams with bidirected edges only), and how many times it is
        trained from different starts. A mixture over each component's latent
        states needs longer training than the cross-fitted models, and a run
        can end in the degenerate mixture whose states all predict alike
        (which answers do(X) like P(Y | X)); every 100 steps the weights are
        scored by the rows' likelihood under the decoder, and the best
        scoring weights of the best restart are kept.
    folds : int
        Folds of rows for cross-fitting (at least 2).
    prior_counts : float
        Prior weight of the counts-only answer against the neural prior, in
        (0, 1]; 1 gives the plug-in's smoothed counts.
    seed : int
        Seeds folds, weights and noise: the same seed on the same machine
        gives the same model.
    mode : {"auto", "exact", "monte_carlo"}
        How queries are answered.
    max_table_rows : int
        Largest parent-configuration count for which ``auto`` picks exact mode.
    z_samples : int
        Points of z (scrambled Sobol points covering its prior) per parent
        configuration when tabulating.
    mc_samples : int
        Samples per query in Monte Carlo mode.
    cut : bool
        True (default): interventions cut parent edges and intervened rows
        follow their regime. False is the ablation: counting is regime-blind
        and do(X=x) is answered as if X=x had been observed.
    u_states : int
        Number of states of the shared discrete latent of each confounded
        component; the latent becomes a node of that many states in exact mode.
    unidentified : {"refuse", "answer"}
        On a diagram with hidden common causes, a query that is not
        identifiable raises :class:`NotIdentified` (default), or is answered
        from the model with the returned distribution marked
        ``identified=False``.
    device : str
        Training device (CPU by default; never required).
    progress : bool
        Show a tqdm progress bar while training.
    threads : int, optional
        Torch threads while fitting and sampling (default: one).

    Examples
    --------
    >>> import intervgnn as ig
    >>> net = ig.load_network("earthquake")
    >>> est = NeuralEstimator(seed=0).fit(net.sample(2000, seed=0), net.graph)
    >>> est.query("Alarm", do={"Burglary": "True"}).variables
    ('Alarm',)
    """

    name = "neural"

    def __init__(
        self,
        dim: int = 16,
        hidden: int = 32,
        z_dim: int = 4,
        num_layers: int = 2,
        encoder_hidden: int | None = 8,
        steps: int = 50,
        lr: float = 1e-2,
        weight_decay: float = 0.0,
        latent_steps: int = 3000,
        latent_lr: float = 1e-2,
        latent_restarts: int = 2,
        folds: int = 2,
        prior_counts: float = 0.5,
        seed: int = 0,
        mode: str = "auto",
        max_table_rows: int = 4096,
        z_samples: int = 16,
        mc_samples: int = 20000,
        cut: bool = True,
        u_states: int = 6,
        unidentified: str = "refuse",
        device: str = "cpu",
        progress: bool = False,
        threads: int | None = None,
    ):
        self.dim = dim
        self.hidden = hidden
        self.z_dim = z_dim
        self.num_layers = num_layers
        self.encoder_hidden = encoder_hidden
        self.steps = steps
        self.lr = lr
        self.weight_decay = weight_decay
        self.latent_steps = latent_steps
        self.latent_lr = latent_lr
        self.latent_restarts = latent_restarts
        self.folds = folds
        self.prior_counts = prior_counts
        self.seed = seed
        self.mode = mode
        self.max_table_rows = max_table_rows
        self.z_samples = z_samples
        self.mc_samples = mc_samples
        self.cut = cut
        self.u_states = u_states
        self.unidentified = unidentified
        self.device = device
        self.progress = progress
        self.threads = threads

    # ------------------------------------------------------------------ fit
    def _check_settings(self) -> None:
        if self.mode not in _MODES:
            raise QueryError(f"mode must be one of {', '.join(_MODES)}; got {short_repr(self.mode)}")
        positive = ("dim", "hidden", "z_dim", "num_layers", "steps", "latent_steps", "latent_restarts", "z_samples",
                    "mc_samples", "u_states", "max_table_rows")
        for key in positive + ("encoder_hidden", "threads"):
            value = getattr(self, key)
            if key in ("encoder_hidden", "threads") and value is None:
                continue
            if isinstance(value, bool) or not isinstance(value, (int, np.integer)) or value < 1:
                raise DataError(f"{key} must be a positive integer, got {short_repr(value)}")
        if isinstance(self.folds, bool) or not isinstance(self.folds, (int, np.integer)) or self.folds < 2:
            raise DataError(f"folds must be a whole number of at least 2, got {short_repr(self.folds)}")
        # sizes beyond these cannot be meant: the model or its samples would not fit in memory, or
        # training would not end (the defaults are far below: dim 16, steps 50, mc_samples 20000)
        most = {"dim": 4096, "hidden": 4096, "z_dim": 4096, "encoder_hidden": 4096, "num_layers": 64,
                "steps": 10**6, "latent_steps": 10**6, "latent_restarts": 100, "folds": 100,
                "z_samples": 10**4, "mc_samples": 10**7, "u_states": 1000}
        for key, limit in most.items():
            value = getattr(self, key)
            if value is not None and value > limit:
                raise DataError(f"{key} must be at most {limit:,}, got {short_repr(value)}")
        for key in ("lr", "latent_lr", "weight_decay", "prior_counts"):
            value = getattr(self, key)
            # NaN, infinity and whole numbers beyond the largest float are not numbers Adam can use
            if isinstance(value, bool) or not isinstance(value, (int, float)) or not abs(value) <= float(np.finfo(np.float64).max):
                raise DataError(f"{key} must be a number, got {short_repr(value)}")
        for key in ("lr", "latent_lr"):
            if not getattr(self, key) > 0:
                raise DataError(f"{key} must be above 0, got {getattr(self, key)!r}")
        if self.weight_decay < 0:
            raise DataError(f"weight_decay must be 0 or more, got {self.weight_decay!r}")
        if not 0 < self.prior_counts <= 1:
            raise DataError(f"prior_counts must lie in (0, 1], got {self.prior_counts!r}")
        check_seed(self.seed)
        if self.unidentified not in ("refuse", "answer"):
            raise QueryError(f"unidentified must be 'refuse' or 'answer'; got {short_repr(self.unidentified)}")

    def _groups(self, graph: CausalGraph | None = None) -> list[list[int]]:
        """Node indices of each confounded component (two or more nodes)."""
        graph = self.graph_ if graph is None else graph
        index = {v: i for i, v in enumerate(graph.nodes)}
        return [[index[v] for v in comp] for comp in graph.c_components() if len(comp) > 1]

    def _build(self, graph: CausalGraph, states: Mapping[str, tuple[str, ...]], seed: int) -> InterventionalVGAE:
        with torch.random.fork_rng(devices=[]):  # seeded without touching the caller's global generator
            torch.manual_seed(int(seed))
            return self._construct(graph, states)

    def _construct(self, graph: CausalGraph, states: Mapping[str, tuple[str, ...]]) -> InterventionalVGAE:
        return InterventionalVGAE(
            [len(states[v]) for v in graph.nodes],
            graph.edge_index,
            dim=self.dim,
            hidden=self.hidden,
            z_dim=self.z_dim,
            num_layers=self.num_layers,
            encoder_hidden=self.encoder_hidden,
            groups=self._groups(graph),
            u_states=self.u_states,
        ).to(self.device)

    def _parents(self, graph: CausalGraph | None = None) -> list[list[int]]:
        graph = self.graph_ if graph is None else graph
        index = {v: i for i, v in enumerate(graph.nodes)}
        return [[index[p] for p in graph.parents(v)] for v in graph.nodes]

    def fit(self, table: Table, graph: CausalGraph) -> NeuralEstimator:
        """Train on ``table`` (observational and experimental rows) for the diagram ``graph``.

        Raises
        ------
        DataError
            Bad settings, or data that do not match the graph.
        """
        self._check_settings()
        table = check_fit_inputs(table, graph)
        states = table.states
        cards = [len(states[v]) for v in graph.nodes]
        for v in graph.nodes:
            size = int(np.prod([len(states[p]) for p in graph.parents(v)], dtype=object)) * len(states[v])
            if size >= MAX_FAMILY_CELLS:
                raise DataError(f"variable '{v}' has {size} (parent configuration, state) pairs; too many to count")
        self._forget()
        with torch_threads(self.threads):
            groups = self._groups(graph)
            n = table.n_rows
            folds = np.empty(n, dtype=np.int64)
            folds[np.random.default_rng(_seed(self.seed, 1)).permutation(n)] = np.arange(n) % self.folds
            cells = count_cells(
                table.codes, table.intervened, self._parents(graph), cards, groups=groups, folds=folds,
                num_folds=self.folds, regime_aware=self.cut,
            )
            members = {i for g in groups for i in g}
            free = [i for i in range(len(cards)) if i not in members]
            plan = ([f"fold{f}" for f in range(self.folds)] if free else []) + (
                [f"all#{r}" for r in range(self.latent_restarts)] if groups else []
            )
            total = sum(self.latent_steps if key.startswith("all") else self.steps for key in plan)
            bar = None
            if self.progress and total:
                from tqdm.auto import tqdm

                bar = tqdm(total=total, desc=f"training {len(plan)} models", unit="step", leave=False)
            models, results, scores = {}, {}, []
            template = self._build(graph, states, 0) if plan else None

            def fresh(key: str) -> InterventionalVGAE:
                # a copy of one built model, re-initialised with this model's seed (cheaper than a build)
                model = copy.deepcopy(template)
                with torch.random.fork_rng(devices=[]):
                    torch.manual_seed(_seed(self.seed, 2, plan.index(key)))
                    model.reset_parameters()
                return model

            def tick_for(key: str, per_step: int):
                def tick(step, elbo):
                    if bar is not None:
                        bar.update(per_step)
                        if step % 10 == 0:
                            bar.set_postfix(model=key, elbo=f"{elbo:.3f}")

                return tick

            def train_folds(keys: list[str]) -> None:
                # the cross-fitted models side by side in one model of block-diagonal layers: one pass per
                # step for all of them (see intervgnn.models.replicas); each ends as if trained alone
                part = cells.subset(free)
                fold_models, weights, rows, seeds = [], [], [], []
                for key in keys:
                    f = int(key[4:])
                    model = fresh(key)
                    weights.append(part.heldout(f))
                    init_output_bias(model, part, weights[-1])
                    fold_models.append(model)
                    rows.append(n - int(np.count_nonzero(folds == f)))
                    seeds.append(_seed(self.seed, 3, plan.index(key)))
                # two at a time: a stacked layer holds R^2 blocks, so its arithmetic grows with R^2
                for start in range(0, len(keys), 2):
                    group = slice(start, start + 2)
                    members = fold_models[group]
                    if len(members) > 1:
                        big = stack_models(members)
                        batch = FamilyBatch.from_cells(big, part)
                        out = train_replicas(
                            big, batch, weights[group], steps=self.steps, lr=self.lr, weight_decay=self.weight_decay,
                            seeds=seeds[group], rows=rows[group], on_step=tick_for("folds", len(members)),
                        )
                        unstack_models(big, members)
                    else:
                        batch = FamilyBatch.from_cells(members[0], part)
                        out = [train_vgae(
                            members[0], batch, weights[start], steps=self.steps, lr=self.lr,
                            weight_decay=self.weight_decay, seed=seeds[start], rows=rows[start],
                            on_step=tick_for(keys[start], 1),
                        )]
                    for key, model, result in zip(keys[group], members, out):
                        models[key], results[key] = model.to("cpu").eval(), result

            def train_latent(key: str):
                model = fresh(key)
                weight, group_weight = cells.count, [g.count for g in cells.groups]
                batch = FamilyBatch.from_cells(model, cells)
                init_output_bias(model, cells, weight)
                result = train_vgae(
                    model, batch, weight, group_weight, steps=self.latent_steps, lr=self.latent_lr,
                    weight_decay=self.weight_decay, seed=_seed(self.seed, 3, plan.index(key)), rows=n,
                    on_step=tick_for(key, 1), keep_best_every=100,
                )
                return model.to("cpu").eval(), result

            try:
                fold_keys = [key for key in plan if key.startswith("fold")]
                if fold_keys:
                    train_folds(fold_keys)
                latent = []
                for key in plan:
                    if key.startswith("all"):
                        model, result = train_latent(key)
                        latent.append((max(score for _, score in result.checkpoints), model, result))
                if latent:
                    # restarts of a mixture: keep the one whose rows are most likely (a degenerate mixture,
                    # whose latent states all predict alike, scores lower)
                    scores = [score for score, _, _ in latent]
                    _, models["all"], results["all"] = max(latent, key=lambda item: item[0])
            finally:
                if bar is not None:
                    bar.close()
            # learned state is set only once everything above has succeeded
            self.graph_, self.states_, self.cells_, self.n_rows_ = graph, states, cells, n
            self.models_, self.train_results_, self.latent_scores_ = models, results, scores
            try:
                self._prepare_answers()
            except BaseException:
                self._forget()
                raise
        self._keep_fitted_rows(table, graph)  # for bootstrap intervals
        return self

    def _forget(self) -> None:
        """Drop everything a previous fit learned (a new fit starts clean; a failed one leaves nothing)."""
        for name in ("graph_", "states_", "cells_", "n_rows_", "models_", "train_results_", "latent_scores_",
                     "mixtures_", "network_", "answer_mode_", "table_rows_", "_count_rows", "_identifications",
                     "_fitted_rows", "_bootstrap_refits", "_posterior", "_fold_bases", "_posterior_draws_kept",
                     "_counts_only"):
            self.__dict__.pop(name, None)

    # ------------------------------------------------------------ answering
    @property
    def model_(self) -> InterventionalVGAE:
        """The first trained VGAE (a cross-fitted one, or the latent model when every node is confounded)."""
        self._check_fitted()
        return next(iter(self.models_.values()))

    @property
    def neural_share_(self) -> dict[str, float]:
        """Per variable, the posterior weight of the neural prior against the counts (0: counts alone).

        Variables in a confounded component are answered by the latent model
        and are not listed.
        """
        self._check_fitted()
        return {self.graph_.nodes[i]: m.neural_share for i, m in self.mixtures_.items()}

    def _fold_keys(self) -> list[str]:
        return [k for k in self.models_ if k.startswith("fold")]

    def _prepare_answers(self) -> None:
        graph, states, cells = self.graph_, self.states_, self.cells_
        nodes = graph.nodes
        cards = {v: len(states[v]) for v in nodes}
        parents = self._parents()
        self.table_rows_ = table_rows_needed(graph, cards, self.u_states)
        exact = self.mode == "exact" or (self.mode == "auto" and self.table_rows_ <= self.max_table_rows)
        self.answer_mode_ = "exact" if exact else "monte_carlo"
        self.network_ = None
        self._identifications = {}
        groups = self._groups()
        members = {i for g in groups for i in g}
        free = [i for i in range(len(nodes)) if i not in members]
        fold_models = [self.models_[k] for k in self._fold_keys()]
        # the configurations each free node needs: all of them (exact mode) or the observed ones
        need_node, need_cfg, rows_of, offset = [], [], {}, 0
        for v in free:
            if exact:
                cfgs = np.arange(cells.configs(v))
            else:
                cfgs = np.unique(cells.cfg[cells.node_slice(v)])
            rows_of[v] = (offset, cfgs)
            offset += len(cfgs)
            need_node.append(np.full(len(cfgs), v))
            need_cfg.append(cfgs)
        bases = []
        if fold_models and free:
            node_arr, cfg_arr = np.concatenate(need_node), np.concatenate(need_cfg)
            for f, model in enumerate(fold_models):
                bases.append(conditionals(model, parents, node_arr, cfg_arr, self.z_samples, _seed(self.seed, 4, f)))
        self.mixtures_: dict[int, Mixture] = {}
        self._count_rows: dict[int, tuple[np.ndarray, np.ndarray]] = {}
        self._posterior: dict[str, tuple] = {}  # per variable: counts, base, mixture, CPT shape (exact mode)
        self._fold_bases: dict[str, np.ndarray] = {}  # per variable: each fold decoder's rows [F, R, k] (exact mode)
        self._row_weights: dict[str, tuple[RowPriors, np.ndarray]] = {}  # per variable: counts-only rows' prior, shapes
        cpts: dict[str, np.ndarray] = {}
        for v in free:
            start, cfgs = rows_of[v]
            k = cells.cards[v]
            sl = cells.node_slice(v)
            pos = np.searchsorted(cfgs, cells.cfg[sl])
            counts = np.zeros((len(cfgs), k))
            np.add.at(counts, (pos, cells.state[sl]), cells.count[sl])
            fold_counts = []
            for f in range(len(fold_models)):
                fc = np.zeros((len(cfgs), k))
                np.add.at(fc, (pos, cells.state[sl]), cells.fold_count[f, sl])
                fold_counts.append(fc)
            fold_bases = [b[start : start + len(cfgs), :k] for b in bases]
            mix = mixture_weights(counts, fold_counts, fold_bases, self.prior_counts if fold_bases else 1.0)
            base = np.mean(fold_bases, axis=0) if fold_bases else np.full((len(cfgs), k), 1.0 / k)
            self.mixtures_[v] = mix
            if exact:
                pcards = [cells.cards[p] for p in parents[v]]
                cpts[nodes[v]] = mixture_rows(counts, base, mix).reshape(pcards + [k])
                self._posterior[nodes[v]] = (counts, base, mix, tuple(pcards) + (k,))
                if len(fold_bases) > 1:
                    self._fold_bases[nodes[v]] = np.stack(fold_bases)
            else:
                self._count_rows[v] = (cfgs, counts)
        if not exact:
            return
        if groups:
            aug, all_cards, latent_cpts = tabulate_cpts(
                self.models_["all"], graph, cards, samples=self.z_samples, seed=_seed(self.seed, 5)
            )
            for v in aug.nodes:
                cpts.setdefault(v, latent_cpts[v])
            full_states = dict(states)
            for v in aug.nodes:
                if v not in full_states:
                    full_states[v] = tuple(f"draw {j}" for j in range(all_cards[v]))
            self.network_ = CausalNetwork(aug, full_states, cpts, name="neural")
        else:
            self.network_ = CausalNetwork(graph, states, cpts, name="neural")

    def _mc_conditional(self, seed: int):
        """Node conditionals for Monte Carlo mode: the same mixtures as exact mode, computed per sample."""
        nodes = self.graph_.nodes
        parents = self._parents()
        cards = self.cells_.cards
        fold_models = [self.models_[k] for k in self._fold_keys()]
        latent = self.models_.get("all")
        gen = torch.Generator().manual_seed(int(seed))
        state = {"u": None}
        index = {v: i for i, v in enumerate(nodes)}

        def decode_probs(model, v, codes, u=None):
            s = codes.shape[0]
            cfg = config_index(codes, parents[v], [cards[p] for p in parents[v]])
            node = np.full(s, v)
            edges = torch.as_tensor(family_edges(parents, cards, node, cfg))
            z = torch.randn(s, model.z_dim, generator=gen)
            uu = None if u is None else torch.as_tensor(u)
            with torch.no_grad():
                logits = model.decode_families(torch.as_tensor(node), z, edges, uu)[:, : cards[v]]
                return torch.softmax(logits.double(), dim=-1).numpy(), cfg

        def conditional(name: str, codes: np.ndarray) -> np.ndarray:
            v = index[name]
            s = codes.shape[0]
            if v in self.mixtures_:
                if fold_models:
                    probs = [decode_probs(m, v, codes) for m in fold_models]
                    base, cfg = np.mean([p for p, _ in probs], axis=0), probs[0][1]
                else:
                    cfg = config_index(codes, parents[v], [cards[p] for p in parents[v]])
                    base = np.full((s, cards[v]), 1.0 / cards[v])
                cfgs, counts = self._count_rows[v]
                pos = np.clip(np.searchsorted(cfgs, cfg), 0, max(len(cfgs) - 1, 0))
                seen = (cfgs[pos] == cfg) if len(cfgs) else np.zeros(s, dtype=bool)
                rows = np.where(seen[:, None], counts[pos], 0.0) if len(cfgs) else np.zeros((s, cards[v]))
                return mixture_rows(rows, base, self.mixtures_[v])
            # a member of a confounded component: the latent model, hearing its component's latent
            if state["u"] is None:
                state["u"] = latent.prior_sample_u(s, gen).cpu().numpy()
            g = int(latent.node_group[v])
            return decode_probs(latent, v, codes, state["u"][:, g])[0]

        return conditional

    # ---------------------------------------------------------------- query
    # ------------------------------------------------------------ intervals
    #: draws from the posterior when an interval is asked without ``draws``
    posterior_draws = 200

    def _posterior_ready(self) -> bool:
        return (self.answer_mode_ == "exact" and self.cut and not self._groups()
                and len(self.__dict__.get("_posterior", {})) == len(self.graph_.nodes))

    def _interval_method(self) -> str:
        return "posterior" if self._posterior_ready() else "bootstrap"

    def _interval_include(self, queries) -> list:
        """The counts-only answers (see :meth:`Estimator._counts_only_answers`); none for bootstrap intervals."""
        if not self._posterior_ready():
            return [None] * len(queries)
        if "_counts_only" not in self.__dict__:  # computed once, for every interval after
            from .plugin import counts_only_rows

            counts = {v: c.reshape(shape) for v, (c, _, _, shape) in self._posterior.items()}
            self._counts_only = (counts, {v: counts_only_rows(c) for v, c in counts.items()})
        return self._counts_only_answers(queries, *self._counts_only)

    def _interval_samples(self, queries, level, draws, seed) -> list[np.ndarray]:
        """Answers under CPT sets drawn from the posterior of the shrunk CPTs (whose mean is nearly the answer's CPTs).

        Each CPT row is the posterior mean of Dirichlet(counts + s m + alpha)
        averaged over the candidates (s, alpha) with their weights
        (:mod:`~intervgnn.models.shrinkage`); a draw picks a candidate by its
        weight, then the row from that Dirichlet, so the interval carries
        the pull towards the decoder as well as the counts' noise. The
        decoder m is the mean of the cross-fitting folds' decoders, each
        trained without its fold, and it is uncertain too: a draw takes the
        decoder of one fold for every variable (a fold's model is one
        replicate of the whole network), its deviation from the mean scaled
        by sqrt(F - 1) for F folds, so that the spread over folds has the
        delete-a-group jackknife's variance, (F - 1)/F times the sum of the
        squared deviations (Tukey 1958, Ann. Math. Statist. 29: 614, cited
        from memory); for the default two folds, one fold's decoder as it
        is. The folds' decoders also differ by their training seeds, so the
        spread holds some optimisation noise besides the data's. Without
        it, a rare row the decoder learnt from the same few rows its prior
        pseudo-counts stand for was drawn as if the decoder were known. Where it
        picks the counts-only candidate, the rows come from the posterior
        the plug-in fitted with ``alpha="auto"`` draws from
        (:func:`~intervgnn.estimators.plugin.mixed_dirichlet_rows`: each
        row's prior is uncertain, not the one smoothing value the point
        estimate uses, so the answer is not quite the draws' mean; the interval
        always holds it). Every
        drawn set is answered exactly in one contraction. In Monte Carlo
        mode, with hidden common causes or without the cut, the bootstrap of
        :class:`Estimator` is used instead.
        """
        if not self._posterior_ready():
            return super()._interval_samples(queries, level, draws, seed)
        from .plugin import dirichlet_draws, kept_mixed_dirichlet_rows

        self._check_interval_settings(level, draws, seed)
        draws = self.posterior_draws if draws is None else int(draws)
        # each draw's fold, one for every variable (its own stream: the CPT draws stay as they were for a seed)
        fold_of_draw = np.random.default_rng([int(seed), 1]).integers(max(self.folds, 1), size=draws)

        def draw_cpt(rng, v, n):
            counts, base, mix, shape = self._posterior[v]
            pick = rng.choice(mix.weight.size, size=n, p=mix.weight)
            folds = self.__dict__.get("_fold_bases", {}).get(v)
            if folds is not None:  # the draw's fold decoder, its deviation scaled to the jackknife's variance
                base = base[None] + np.sqrt(len(folds) - 1) * (folds[fold_of_draw[:n] % len(folds)] - base[None])
                base = np.maximum(base, 0.0)  # beyond two folds the scaled deviation can leave the simplex
                base /= base.sum(axis=-1, keepdims=True)
            out = dirichlet_draws(rng, mix.dirichlet_params(counts, base, pick))
            plain = mix.strength[pick] == 0  # the counts-only candidate: the plug-in's posterior
            if plain.any():  # the cache is emptied by fit; a loaded model starts one here
                cache = self.__dict__.setdefault("_row_weights", {})
                out[plain] = kept_mixed_dirichlet_rows(cache, v, rng, counts, int(plain.sum()))
            return out.reshape((n,) + shape)

        return self._posterior_answers(queries, draws, seed, draw_cpt)

    def _answer(self, q: Query):
        ident = self.identification(q)
        if ident is not None and not ident.identifiable and self.unidentified == "refuse":
            raise NotIdentified(ident)
        do, given = q.do_dict, q.given_dict
        if self.answer_mode_ == "exact":
            if self.cut:
                return self.network_.query(q.targets, do=do, given=given).probs
            return self.network_.query(q.targets, given={**given, **do}).probs
        codes = lambda a: {v: self.states_[v].index(s) for v, s in a.items()}  # noqa: E731
        cards = {v: len(s) for v, s in self.states_.items()}
        with torch_threads(self.threads):
            return monte_carlo(
                self._mc_conditional(_seed(self.seed, 6)), self.graph_, cards, q.targets, codes(do), codes(given),
                samples=self.mc_samples, seed=_seed(self.seed, 7), cut=self.cut,
            )

    # ---------------------------------------------------------- checkpoints
    def _tensors(self) -> dict[str, torch.Tensor]:
        """Everything learned, as named tensors: each model's weights and the counted cells."""
        out: dict[str, torch.Tensor] = {}
        for key, model in self.models_.items():
            for name, value in model.state_dict().items():
                out[f"{key}.{name}"] = value.detach().cpu()
        c = self.cells_
        out["cells.node"] = torch.as_tensor(c.node)
        out["cells.cfg"] = torch.as_tensor(c.cfg)
        out["cells.state"] = torch.as_tensor(c.state)
        out["cells.count"] = torch.as_tensor(c.count)
        out["cells.fold_count"] = torch.as_tensor(c.fold_count)
        for i, g in enumerate(c.groups):
            out[f"group{i}.cell"] = torch.as_tensor(g.cell)
            out[f"group{i}.count"] = torch.as_tensor(g.count)
            out[f"group{i}.fold_count"] = torch.as_tensor(g.fold_count)
        return out

    def save(self, path: str | os.PathLike) -> None:
        """Save to a folder: ``weights.pt`` (named tensors) and ``model.json`` (graph, states, settings, version).

        ``weights.pt`` holds the trained models' weights and the counted
        family configurations (the sufficient statistics the CPTs are built
        from; they summarise the training rows). ``model.json`` records the
        SHA-256 of ``weights.pt`` (field ``weights_sha256``) and the SHA-256
        of its own other fields in canonical JSON (field ``sha256``), so that
        a changed weights file or a changed description is refused on load.
        The hashes are not keyed: they catch damage and careless edits, not
        a forgery by someone who recomputes them.

        Raises
        ------
        CheckpointError
            A description that :meth:`load` would refuse (for example a state
            named by the empty string); nothing is written then.
        WriteError
            The folder or a file cannot be written.
        """
        self._check_fitted()
        from .. import __version__

        path = os.fspath(path)
        buffer = io.BytesIO()
        torch.save(self._tensors(), buffer)
        blob = buffer.getvalue()
        params = self.get_params()
        params["progress"] = False
        meta = {
            "format": CHECKPOINT_FORMAT,
            "package_version": __version__,
            "estimator": "neural",
            "nodes": list(self.graph_.nodes),
            "edges": [list(e) for e in self.graph_.edges],
            "confounded": [list(e) for e in self.graph_.bidirected],
            "states": {v: list(s) for v, s in self.states_.items()},
            "settings": params,
            "models": list(self.models_),
            "rows": int(self.n_rows_),
            "weights_sha256": hashlib.sha256(blob).hexdigest(),
        }
        meta = json.loads(json.dumps(meta, default=_plain))  # as load reads it back (tuples become lists)
        meta["sha256"] = _description_hash(meta)
        _check_description(type(self), meta, os.path.join(path, META_FILE))  # what is saved must load
        make_folder(path)
        with atomic_open(os.path.join(path, WEIGHTS_FILE), "wb") as fh:
            fh.write(blob)
        with atomic_open(os.path.join(path, META_FILE), "w") as fh:
            json.dump(meta, fh, indent=2)

    @classmethod
    def load(cls, path: str | os.PathLike, graph: CausalGraph | None = None, table: Table | None = None) -> NeuralEstimator:
        """Load a saved model; refuse it when it does not match ``graph`` or ``table``.

        Every field of ``model.json`` is checked for its type and range, and
        both recorded hashes must match (of ``weights.pt``, and of the
        description's other fields), before anything is built.

        Raises
        ------
        CheckpointError
            Missing or unreadable files, a model saved in another format or
            by a newer intervgnn (another major or minor version), a
            malformed description or bad settings, a weights file or a
            description changed after saving (hash mismatch), weights that do
            not fit the recorded model, or a graph / data whose variables,
            edges or states differ.
        """
        path = os.fspath(path)
        meta_path, weights_path = os.path.join(path, META_FILE), os.path.join(path, WEIGHTS_FILE)
        for p in (meta_path, weights_path):
            if not os.path.exists(p):
                raise CheckpointError(f"{path}: not a saved model (missing {os.path.basename(p)})")
        meta = _read_description(meta_path)
        _check_format(meta, meta_path)
        try:
            with open(weights_path, "rb") as fh:
                blob = fh.read()
        except OSError as exc:
            raise CheckpointError(f"{weights_path}: cannot read the weights ({exc.strerror or type(exc).__name__})") from None
        saved_graph, states, settings, keys, rows = _check_description(cls, meta, meta_path)
        if _description_hash(meta) != meta["sha256"]:
            raise CheckpointError(
                f"{meta_path}: the model description was changed after saving (hash mismatch); refusing it. "
                "Restore the saved files or fit the model again."
            )
        if hashlib.sha256(blob).hexdigest() != meta["weights_sha256"]:
            raise CheckpointError(f"{weights_path}: the weights file was changed after saving (hash mismatch); refusing it")
        if graph is not None:
            _check_same_graph(saved_graph, graph, path)
        if table is not None:
            _check_same_states(states, table, path)
        est = cls(**settings)  # checked by _check_description
        try:
            tensors = torch.load(io.BytesIO(blob), map_location="cpu", weights_only=True)
            est.graph_, est.states_, est.n_rows_ = saved_graph, states, rows
            est.models_ = {}
            for i, key in enumerate(keys):
                model = est._build(saved_graph, states, 0).to("cpu")
                prefix = f"{key}."
                model.load_state_dict({k[len(prefix):]: v for k, v in tensors.items() if k.startswith(prefix)})
                est.models_[key] = model.eval()
            groups = est._groups()
            cells = FamilyCells(
                parents=est._parents(), cards=[len(states[v]) for v in saved_graph.nodes],
                node=tensors["cells.node"].numpy(), cfg=tensors["cells.cfg"].numpy(),
                state=tensors["cells.state"].numpy(), count=tensors["cells.count"].numpy(),
                fold_count=tensors["cells.fold_count"].numpy(), n_rows=rows,
            )
            for i, g in enumerate(groups):
                cells.groups.append(GroupCells(
                    tuple(g), tensors[f"group{i}.cell"].numpy(), tensors[f"group{i}.count"].numpy(),
                    tensors[f"group{i}.fold_count"].numpy(),
                ))
            est.cells_ = cells
            est.train_results_ = {}
        except Exception as exc:
            raise CheckpointError(f"{weights_path}: the weights do not fit the recorded model ({type(exc).__name__})") from None
        try:
            with torch_threads(est.threads):
                est._prepare_answers()
        except Exception as exc:  # the recorded model cannot answer: the files are not as saved
            raise CheckpointError(
                f"{path}: the saved model cannot answer queries ({type(exc).__name__}: {shorten(str(exc), 120)}); "
                "fit the model again"
            ) from None
        if table is not None and table.n_rows == rows:  # the rows it was fitted on: intervals resample them
            est._keep_fitted_rows(table, saved_graph)
        return est


def _plain(value):
    """JSON form of a numpy scalar in the settings (``json.dumps`` hook)."""
    if isinstance(value, np.bool_):
        return bool(value)
    if isinstance(value, np.integer):
        return int(value)
    if isinstance(value, np.floating):
        return float(value)
    raise TypeError(f"{type(value).__name__} is not JSON serialisable")


def _description_hash(meta: Mapping) -> str:
    """SHA-256 of every field of ``model.json`` but ``sha256``, as canonical JSON (sorted keys, no spaces).

    The fields include ``weights_sha256``, so this one hash covers the weights too.
    """
    canonical = json.dumps({k: v for k, v in meta.items() if k != "sha256"}, sort_keys=True, separators=(",", ":"),
                           ensure_ascii=True)
    return hashlib.sha256(canonical.encode("ascii")).hexdigest()


def _read_description(meta_path: str):
    """The parsed ``model.json``; any reading or parsing failure is a :class:`CheckpointError`."""
    try:
        with open(meta_path, "rb") as fh:
            raw = fh.read(MAX_META_BYTES + 1)
    except OSError as exc:
        raise CheckpointError(
            f"{meta_path}: cannot read the model description ({exc.strerror or type(exc).__name__})"
        ) from None
    if len(raw) > MAX_META_BYTES:
        raise CheckpointError(
            f"{meta_path}: the model description is larger than {MAX_META_BYTES // 2**20} MiB; not a saved model"
        )
    try:
        return json.loads(raw.decode("utf-8"))
    except RecursionError:
        raise CheckpointError(f"{meta_path}: cannot read the model description (JSON nested too deeply)") from None
    except ValueError as exc:  # not UTF-8, not JSON, or an integer too long to read
        raise CheckpointError(f"{meta_path}: cannot read the model description ({shorten(str(exc), 120)})") from None


def _version_numbers(version) -> tuple[int, int, int] | None:
    """``(major, minor, patch)`` of a version string such as ``0.2.0`` or ``0.3.0rc1``; None if it is not one."""
    if not isinstance(version, str):
        return None
    m = re.fullmatch(r"(\d{1,6})\.(\d{1,6})(?:\.(\d{1,6}))?([A-Za-z0-9.+-]{0,40})", version)
    return None if m is None else (int(m[1]), int(m[2]), int(m[3] or 0))


def _check_format(meta, meta_path: str) -> None:
    """Refuse a description of another format, or one saved by a newer intervgnn."""
    from .. import __version__

    fmt = meta.get("format") if isinstance(meta, dict) else None
    prefix = "intervgnn-neural-"
    if not isinstance(fmt, str) or not fmt.startswith(prefix):
        raise CheckpointError(f"{meta_path}: not an intervgnn neural model description")
    if fmt != CHECKPOINT_FORMAT:
        number, ours = fmt[len(prefix):], int(CHECKPOINT_FORMAT[len(prefix):])
        if re.fullmatch(r"[0-9]{1,6}", number) and int(number) > ours:
            raise CheckpointError(
                f"{meta_path}: saved in format {short_repr(fmt)} by a newer version of intervgnn; this version reads "
                f"'{CHECKPOINT_FORMAT}'. Upgrade intervgnn to load it, or fit the model again."
            )
        if re.fullmatch(r"[0-9]{1,6}", number):
            raise CheckpointError(
                f"{meta_path}: saved in format {short_repr(fmt)} by an earlier version of intervgnn; "
                f"this version reads '{CHECKPOINT_FORMAT}'. Fit the model again."
            )
        raise CheckpointError(f"{meta_path}: unknown format {short_repr(fmt)}; this version reads '{CHECKPOINT_FORMAT}'")
    version = meta.get("package_version")
    saved = _version_numbers(version)
    if saved is None:
        raise CheckpointError(
            f"{meta_path}: package_version must be a version such as '{__version__}', got {short_repr(version)}"
        )
    ours = _version_numbers(__version__)
    # a newer bug-fix release (same major and minor version) writes the same format; a newer minor or major
    # version may mean the same fields differently
    if ours is not None and saved[:2] > ours[:2]:
        raise CheckpointError(
            f"{meta_path}: saved by intervgnn {version}, newer than this {__version__}; upgrade intervgnn to load "
            "it, or fit the model again with this version"
        )


def _names(value, what: str, meta_path: str) -> list[str]:
    """``value`` as a list of distinct non-empty strings, or a :class:`CheckpointError` naming ``what``."""
    if not isinstance(value, list):
        raise CheckpointError(f"{meta_path}: {what} must be a list of names, got {short_repr(value)}")
    for item in value:
        if not isinstance(item, str) or not item:
            raise CheckpointError(f"{meta_path}: {what} must be non-empty strings, got {short_repr(item)}")
    if len(set(value)) != len(value):
        dup = next(v for v in value if value.count(v) > 1)
        raise CheckpointError(f"{meta_path}: {what} lists {short_repr(dup)} twice")
    return value


def _pairs(value, what: str, meta_path: str) -> list[tuple[str, str]]:
    """``value`` as a list of pairs of strings, or a :class:`CheckpointError` naming ``what``."""
    if not isinstance(value, list):
        raise CheckpointError(f"{meta_path}: {what} must be a list of pairs of names, got {short_repr(value)}")
    for item in value:
        if not (isinstance(item, list) and len(item) == 2 and all(isinstance(w, str) for w in item)):
            raise CheckpointError(f"{meta_path}: {what} must be pairs of names, got {short_repr(item)}")
    return [tuple(item) for item in value]


def _whole(value) -> bool:
    return isinstance(value, int) and not isinstance(value, bool)


def _check_description(cls, meta: dict, meta_path: str):
    """Check the type and range of every field of a parsed ``model.json`` (format and version already checked).

    Returns ``(graph, states, settings, model keys, rows)``; ``settings`` are
    checked by the estimator's own settings check, with ``device`` set to
    the CPU.
    """
    missing = [k for k in _META_FIELDS if k not in meta]
    if missing:
        raise CheckpointError(f"{meta_path}: malformed model description (no field '{missing[0]}')")
    extra = sorted(k for k in meta if k not in _META_FIELDS)
    if extra:
        raise CheckpointError(f"{meta_path}: malformed model description (unknown field {short_repr(extra[0])})")
    if meta["estimator"] != "neural":
        raise CheckpointError(f"{meta_path}: estimator must be 'neural', got {short_repr(meta['estimator'])}")
    for key in ("weights_sha256", "sha256"):
        if not (isinstance(meta[key], str) and re.fullmatch(r"[0-9a-f]{64}", meta[key])):
            raise CheckpointError(f"{meta_path}: {key} must be 64 hexadecimal digits, got {short_repr(meta[key])}")
    nodes = _names(meta["nodes"], "nodes", meta_path)
    edges = _pairs(meta["edges"], "edges", meta_path)
    confounded = _pairs(meta["confounded"], "confounded", meta_path)
    try:
        graph = CausalGraph(edges, nodes=nodes, bidirected=confounded)
    except IntervgnnError as exc:
        raise CheckpointError(f"{meta_path}: the recorded graph is not valid ({shorten(str(exc), 160)})") from None
    raw = meta["states"]
    if not isinstance(raw, dict):
        raise CheckpointError(f"{meta_path}: states must map each variable to its states, got {short_repr(raw)}")
    if set(raw) != set(nodes):
        odd = sorted(set(raw) ^ set(nodes))[0]
        raise CheckpointError(
            f"{meta_path}: states must list exactly the graph's variables; {short_repr(odd)} "
            + ("is not a variable of the graph" if odd in raw else "has no states")
        )
    states: dict[str, tuple[str, ...]] = {}
    for v in nodes:
        if not isinstance(raw[v], list) or not raw[v]:
            raise CheckpointError(
                f"{meta_path}: states of '{shorten(v)}' must be a non-empty list of names, got {short_repr(raw[v])}"
            )
        states[v] = tuple(_names(raw[v], f"states of '{shorten(v)}'", meta_path))
    settings = meta["settings"]
    if not isinstance(settings, dict):
        raise CheckpointError(
            f"{meta_path}: settings must be a mapping of setting names to values, got {short_repr(settings)}"
        )
    known = set(cls().get_params())
    unknown = sorted(k for k in settings if k not in known)
    if unknown:
        raise CheckpointError(f"{meta_path}: unknown setting {short_repr(unknown[0])} in the model description")
    absent = sorted(known - set(settings))
    if absent:
        raise CheckpointError(f"{meta_path}: the model description lacks the setting '{absent[0]}'")
    for key in ("cut", "progress"):  # settings the estimator's check leaves to the caller
        if not isinstance(settings[key], bool):
            raise CheckpointError(
                f"{meta_path}: unusable settings ({key} must be true or false, got {short_repr(settings[key])})"
            )
    if not isinstance(settings["device"], str):
        raise CheckpointError(
            f"{meta_path}: unusable settings (device must be a string, got {short_repr(settings['device'])})"
        )
    settings = {**settings, "device": "cpu"}  # the weights are stored from the CPU; answering needs no other device
    try:
        cls(**settings)._check_settings()
    except (IntervgnnError, TypeError, ValueError) as exc:
        raise CheckpointError(f"{meta_path}: unusable settings ({shorten(str(exc), 160)})") from None
    groups = [c for c in graph.c_components() if len(c) > 1]
    free = len(nodes) > sum(len(c) for c in groups)
    keys = meta["models"]
    expected = (settings["folds"] if free else 0) + (1 if groups else 0)
    if not (isinstance(keys, list) and len(keys) == expected
            and keys == ([f"fold{f}" for f in range(settings["folds"])] if free else []) + (["all"] if groups else [])):
        raise CheckpointError(
            f"{meta_path}: models must be the {expected} models the graph and settings call for, got {short_repr(keys)}"
        )
    rows = meta["rows"]
    if not _whole(rows) or rows < 1:
        raise CheckpointError(f"{meta_path}: rows must be a positive whole number, got {short_repr(rows)}")
    return graph, states, settings, list(keys), rows


def _check_same_graph(saved: CausalGraph, given: CausalGraph, path: str) -> None:
    if set(saved.nodes) != set(given.nodes):
        extra = sorted(set(given.nodes) - set(saved.nodes))
        missing = sorted(set(saved.nodes) - set(given.nodes))
        raise CheckpointError(
            f"{path}: the model was trained on other variables (not in the model: {', '.join(extra) or '-'}; "
            f"missing here: {', '.join(missing) or '-'})"
        )
    if set(saved.edges) != set(given.edges):
        diff = sorted(set(saved.edges) ^ set(given.edges))
        a, b = diff[0]
        raise CheckpointError(f"{path}: the model was trained on another graph (edge {a} -> {b} differs)")
    if {frozenset(e) for e in saved.bidirected} != {frozenset(e) for e in given.bidirected}:
        diff = sorted(tuple(sorted(e)) for e in {frozenset(e) for e in saved.bidirected} ^ {frozenset(e) for e in given.bidirected})
        a, b = diff[0]
        raise CheckpointError(f"{path}: the model was trained on another graph (confounded pair {a} <-> {b} differs)")


def _check_same_states(states: Mapping[str, tuple[str, ...]], table: Table, path: str) -> None:
    for v in table.variables:
        if v not in states:
            raise CheckpointError(f"{path}: the data have variable '{v}', which the model does not know")
        if tuple(table.states[v]) != tuple(states[v]):
            raise CheckpointError(
                f"{path}: states of '{v}' differ: the model has {', '.join(states[v])}; the data have "
                f"{', '.join(table.states[v])}"
            )
