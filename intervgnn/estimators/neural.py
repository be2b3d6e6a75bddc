"""Neural estimator: the interventional VGAE, trained on rows, answering do-queries."""

from __future__ import annotations

import hashlib
import json
import os
from collections.abc import Mapping

import numpy as np
import torch

from .._io import atomic_open, make_folder
from ..bn.network import CausalNetwork
from ..errors import CheckpointError, DataError, NotIdentified, QueryError
from ..graph import CausalGraph
from ..models.answer import monte_carlo, table_rows_needed, tabulate_cpts
from ..models.training import train_vgae
from ..models.vgae import InterventionalVGAE
from ..query import Query
from ..table import Table
from .base import Estimator, check_fit_inputs

__all__ = ["NeuralEstimator", "NotIdentified", "WEIGHTS_FILE", "META_FILE"]

WEIGHTS_FILE = "weights.pt"
META_FILE = "model.json"
_MODES = ("auto", "exact", "monte_carlo")


def auto_batch_size(n_rows: int) -> int:
    """Rows per minibatch when none is set: an eighth of the rows, between 32 and 512."""
    return int(min(512, max(32, n_rows // 8)))


class NeuralEstimator(Estimator):
    """Answer do-queries with an interventional VGAE trained on the rows.

    ``fit`` trains the model with the intervention-aware ELBO (Adam,
    minibatches, early stopping on a held-out split). Queries are answered
    in *exact* mode (each node's conditional tabulated from the decoder over
    its parent configurations, z integrated out by Monte Carlo, then exact
    variable elimination) when every node has at most ``max_table_rows``
    parent configurations, and in *Monte Carlo* mode (ancestral sampling
    through the mutilated graph, likelihood weighting for evidence)
    otherwise; ``mode`` forces one.

    Parameters
    ----------
    dim, hidden, z_dim, num_layers, encoder_hidden : int
        Model size (see :class:`~intervgnn.models.InterventionalVGAE`).
    epochs, batch_size, lr, weight_decay, val_fraction, patience, lr_patience, refit, average
        Training settings (``batch_size=None`` picks an eighth of the rows,
        between 32 and 512) (see :func:`~intervgnn.models.train_vgae`): Adam on
        minibatches, early stopping on a held-out split with a halving
        learning rate, then (``refit``) retraining on all rows for the best
        number of epochs.
    seed : int
        Seeds weights, split, batches and noise: the same seed on the same
        machine gives the same model.
    mode : {"auto", "exact", "monte_carlo"}
        How queries are answered.
    max_table_rows : int
        Largest parent-configuration count for which ``auto`` picks exact mode.
    z_samples : int
        Prior samples of z per parent configuration in exact mode.
    mc_samples : int
        Samples per query in Monte Carlo mode.
    cut : bool
        True (default): interventions cut parent edges and intervened rows
        follow their regime. False is the ablation: training is regime-blind
        and do(X=x) is answered as if X=x had been observed.
    u_states : int
        Number of states of the shared discrete latent of each confounded
        component (diagrams with bidirected edges only); the latent becomes
        a node of that many states in exact mode.
    unidentified : {"refuse", "answer"}
        On a diagram with hidden common causes, a query that is not
        identifiable raises :class:`NotIdentified` (default), or is answered
        from the model with the returned distribution marked
        ``identified=False``.
    device : str
        Training device (CPU by default; never required).
    progress : bool
        Show a tqdm progress bar while training.

    Examples
    --------
    >>> import intervgnn as ig
    >>> net = ig.load_network("earthquake")
    >>> est = NeuralEstimator(epochs=30, seed=0).fit(net.sample(2000, seed=0), net.graph)
    >>> est.query("Alarm", do={"Burglary": "True"}).variables
    ('Alarm',)
    """

    name = "neural"

    def __init__(
        self,
        dim: int = 32,
        hidden: int = 64,
        z_dim: int = 4,
        num_layers: int = 2,
        encoder_hidden: int | None = 16,
        epochs: int = 300,
        batch_size: int | None = None,
        lr: float = 1e-2,
        weight_decay: float = 0.0,
        val_fraction: float = 0.1,
        patience: int = 30,
        lr_patience: int | None = 5,
        refit: bool = True,
        average: float | None = 0.98,
        seed: int = 0,
        mode: str = "auto",
        max_table_rows: int = 4096,
        z_samples: int = 64,
        mc_samples: int = 20000,
        cut: bool = True,
        u_states: int = 4,
        unidentified: str = "refuse",
        device: str = "cpu",
        progress: bool = False,
    ):
        self.dim = dim
        self.hidden = hidden
        self.z_dim = z_dim
        self.num_layers = num_layers
        self.encoder_hidden = encoder_hidden
        self.epochs = epochs
        self.batch_size = batch_size
        self.lr = lr
        self.weight_decay = weight_decay
        self.val_fraction = val_fraction
        self.patience = patience
        self.lr_patience = lr_patience
        self.refit = refit
        self.average = average
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

    # ------------------------------------------------------------------ fit
    def _check_settings(self) -> None:
        if self.mode not in _MODES:
            raise QueryError(f"mode must be one of {', '.join(_MODES)}; got '{self.mode}'")
        for key in ("dim", "hidden", "z_dim", "num_layers", "epochs", "batch_size", "z_samples", "mc_samples", "u_states"):
            value = getattr(self, key)
            if key == "batch_size" and value is None:
                continue
            if isinstance(value, bool) or not isinstance(value, int) or value < 1:
                raise DataError(f"{key} must be a positive integer, got {value!r}")
        if not 0.0 <= float(self.val_fraction) < 1.0:
            raise DataError(f"val_fraction must lie in [0, 1), got {self.val_fraction!r}")
        if self.unidentified not in ("refuse", "answer"):
            raise QueryError(f"unidentified must be 'refuse' or 'answer'; got '{self.unidentified}'")

    def _groups(self, graph: CausalGraph | None = None) -> list[list[int]]:
        """Node indices of each confounded component (two or more nodes)."""
        graph = self.graph_ if graph is None else graph
        index = {v: i for i, v in enumerate(graph.nodes)}
        return [[index[v] for v in comp] for comp in graph.c_components() if len(comp) > 1]

    def _build(self, graph: CausalGraph, states: Mapping[str, tuple[str, ...]]) -> InterventionalVGAE:
        torch.manual_seed(int(self.seed))
        groups = self._groups(graph)
        return InterventionalVGAE(
            [len(states[v]) for v in graph.nodes],
            graph.edge_index,
            dim=self.dim,
            hidden=self.hidden,
            z_dim=self.z_dim,
            num_layers=self.num_layers,
            encoder_hidden=self.encoder_hidden,
            groups=groups,
            u_states=self.u_states,
        )

    def fit(self, table: Table, graph: CausalGraph) -> NeuralEstimator:
        """Train on ``table`` (observational and experimental rows) for the diagram ``graph``."""
        self._check_settings()
        table = check_fit_inputs(table, graph)
        self.graph_ = graph
        self.states_ = table.states
        self.model_ = self._build(graph, self.states_)
        self.train_result_ = train_vgae(
            self.model_,
            table.codes,
            table.intervened,
            epochs=self.epochs,
            batch_size=self.batch_size or auto_batch_size(table.n_rows),
            lr=self.lr,
            weight_decay=self.weight_decay,
            val_fraction=self.val_fraction,
            patience=self.patience,
            lr_patience=self.lr_patience,
            refit=self.refit,
            average=self.average,
            seed=self.seed,
            regime_aware=self.cut,
            use_cut=self.cut,
            device=self.device,
            progress=self.progress,
        )
        self.model_.to("cpu")
        self._prepare_answers()
        return self

    def _prepare_answers(self) -> None:
        cards = {v: len(s) for v, s in self.states_.items()}
        self.table_rows_ = table_rows_needed(self.graph_, cards, self.u_states)
        exact = self.mode == "exact" or (self.mode == "auto" and self.table_rows_ <= self.max_table_rows)
        self.answer_mode_ = "exact" if exact else "monte_carlo"
        self.network_ = None
        self._identifications = {}
        if exact:
            graph, all_cards, cpts = tabulate_cpts(
                self.model_, self.graph_, cards, samples=self.z_samples, seed=self.seed
            )
            states = dict(self.states_)
            for v in graph.nodes:
                if v not in states:
                    states[v] = tuple(f"draw {k}" for k in range(all_cards[v]))
            self.network_ = CausalNetwork(graph, states, cpts, name="neural")

    # ---------------------------------------------------------------- query
    def identification(self, q: Query):
        """Identification of the query's shape on the diagram (cached; None without hidden common causes)."""
        if not self.graph_.has_hidden_confounding or not q.do:
            return None
        key = (q.targets, tuple(sorted(v for v, _ in q.do)), tuple(sorted(v for v, _ in q.given)))
        if key not in self._identifications:
            from ..identify import identify

            self._identifications[key] = identify(self.graph_, list(q.targets), list(key[1]), list(key[2]))
        return self._identifications[key]

    def _identified(self, q: Query):
        ident = self.identification(q)
        return None if ident is None else ident.identifiable

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
        return monte_carlo(
            self.model_, self.graph_, cards, q.targets, codes(do), codes(given),
            samples=self.mc_samples, seed=self.seed, cut=self.cut,
        )

    # ---------------------------------------------------------- checkpoints
    def save(self, path: str | os.PathLike) -> None:
        """Save to a folder: ``weights.pt`` (a state dict) and ``model.json`` (graph, states, settings, version).

        ``model.json`` records the SHA-256 of ``weights.pt`` so that a
        changed weights file is refused on load.
        """
        self._check_fitted()
        from .. import __version__

        path = os.fspath(path)
        make_folder(path)
        weights = os.path.join(path, WEIGHTS_FILE)
        with atomic_open(weights, "wb") as fh:
            torch.save(self.model_.state_dict(), fh)
        with open(weights, "rb") as fh:
            digest = hashlib.sha256(fh.read()).hexdigest()
        params = self.get_params()
        params["progress"] = False
        meta = {
            "format": "intervgnn-neural-1",
            "package_version": __version__,
            "estimator": "neural",
            "nodes": list(self.graph_.nodes),
            "edges": [list(e) for e in self.graph_.edges],
            "confounded": [list(e) for e in self.graph_.bidirected],
            "states": {v: list(s) for v, s in self.states_.items()},
            "settings": params,
            "weights_sha256": digest,
            "best_epoch": self.train_result_.best_epoch if hasattr(self, "train_result_") else None,
        }
        with atomic_open(os.path.join(path, META_FILE), "w") as fh:
            json.dump(meta, fh, indent=2)

    @classmethod
    def load(cls, path: str | os.PathLike, graph: CausalGraph | None = None, table: Table | None = None) -> NeuralEstimator:
        """Load a saved model; refuse it when it does not match ``graph`` or ``table``.

        Raises
        ------
        CheckpointError
            Missing or unreadable files, a weights file whose hash differs
            from the one recorded, weights that do not fit the recorded
            model, or a graph / data whose variables, edges or states differ.
        """
        path = os.fspath(path)
        meta_path, weights_path = os.path.join(path, META_FILE), os.path.join(path, WEIGHTS_FILE)
        for p in (meta_path, weights_path):
            if not os.path.exists(p):
                raise CheckpointError(f"{path}: not a saved model (missing {os.path.basename(p)})")
        try:
            with open(meta_path, encoding="utf-8") as fh:
                meta = json.load(fh)
        except (OSError, ValueError) as exc:
            raise CheckpointError(f"{meta_path}: cannot read the model description ({exc})") from None
        if not isinstance(meta, dict) or meta.get("format") != "intervgnn-neural-1":
            raise CheckpointError(f"{meta_path}: not an intervgnn neural model description")
        with open(weights_path, "rb") as fh:
            blob = fh.read()
        if hashlib.sha256(blob).hexdigest() != meta.get("weights_sha256"):
            raise CheckpointError(f"{weights_path}: the weights file was changed after saving (hash mismatch); refusing it")
        try:
            saved_graph = CausalGraph(
                [tuple(e) for e in meta["edges"]], nodes=meta["nodes"], bidirected=[tuple(e) for e in meta.get("confounded", [])]
            )
            states = {v: tuple(s) for v, s in meta["states"].items()}
            settings = dict(meta["settings"])
        except Exception as exc:  # malformed description
            raise CheckpointError(f"{meta_path}: malformed model description ({exc})") from None
        if graph is not None:
            _check_same_graph(saved_graph, graph, path)
        if table is not None:
            _check_same_states(states, table, path)
        try:
            est = cls(**settings)
        except TypeError as exc:
            raise CheckpointError(f"{meta_path}: unknown settings ({exc})") from None
        est.graph_ = saved_graph
        est.states_ = states
        est.model_ = est._build(saved_graph, states)
        import io

        try:
            state = torch.load(io.BytesIO(blob), map_location="cpu", weights_only=True)
            est.model_.load_state_dict(state)
        except Exception as exc:
            raise CheckpointError(f"{weights_path}: the weights do not fit the recorded model ({type(exc).__name__})") from None
        est.model_.eval()
        est._prepare_answers()
        return est


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
