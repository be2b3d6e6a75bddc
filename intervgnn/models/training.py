"""Training the interventional VGAE on sufficient statistics: full-batch Adam over distinct family configurations."""

from __future__ import annotations

import math
import time
from collections.abc import Callable, Sequence
from dataclasses import dataclass, field

import numpy as np
import torch

from .stats import FamilyCells
from .replicas import mask_replica_grads
from .vgae import FamilyBatch, InterventionalVGAE, family_elbo

__all__ = ["TrainResult", "train_vgae", "train_replicas", "init_output_bias"]


@dataclass
class TrainResult:
    """What training did: the ELBO per row at each step, the scored checkpoints (step, score), the time taken."""

    history: list[float] = field(default_factory=list)
    checkpoints: list[tuple[int, float]] = field(default_factory=list)
    steps: int = 0
    rows: float = 0.0
    cells: int = 0
    seconds: float = 0.0

    @property
    def final_elbo(self) -> float:
        """Mean ELBO per row at the last step (nan before any step)."""
        return self.history[-1] if self.history else math.nan


@torch.no_grad()
def init_output_bias(model: InterventionalVGAE, cells: FamilyCells, weight: np.ndarray) -> None:
    """Set each node's output bias to the log of its smoothed marginal state frequencies in ``weight``.

    A data-dependent start (common practice, no source): the model begins at
    the independence fit and training only has to learn how parents move it.
    """
    counts = np.zeros(model.num_values)
    offsets = model.offsets.cpu().numpy()
    np.add.at(counts, offsets[cells.node] + cells.state, weight)
    bias = model.out_bias.weight
    for v, k in enumerate(model.cards):
        c = counts[offsets[v] : offsets[v] + k] + 1.0
        lp = np.log(c / c.sum())
        bias[model.state_index[v, :k], 0] = torch.as_tensor(lp - lp.mean(), dtype=bias.dtype, device=bias.device)


def _cosine(lr: float, step: int, steps: int) -> float:
    """The learning rate of step ``step`` (from 1) of ``steps``: a cosine from ``lr`` towards zero."""
    return lr * 0.5 * (1.0 + math.cos(math.pi * (step - 1) / steps))


def _adam(params, lr: float, weight_decay: float) -> torch.optim.Optimizer:
    try:
        return torch.optim.Adam(params, lr=lr, weight_decay=weight_decay, fused=True)
    except (RuntimeError, TypeError, ValueError):  # fused kernels are missing on some builds and devices
        return torch.optim.Adam(params, lr=lr, weight_decay=weight_decay)


def train_vgae(
    model: InterventionalVGAE,
    batch: FamilyBatch,
    weight: np.ndarray,
    group_weight: Sequence[np.ndarray] = (),
    *,
    steps: int = 100,
    lr: float = 1e-2,
    weight_decay: float = 0.0,
    seed: int = 0,
    rows: float | None = None,
    keep_best_every: int = 0,
    on_step: Callable[[int, float], None] | None = None,
) -> TrainResult:
    """Maximise the intervention-aware ELBO of count-weighted cells with full-batch Adam.

    Each step evaluates the ELBO of *all* rows at once through their
    distinct family configurations (:func:`~intervgnn.models.vgae.family_elbo`),
    so a step costs the same at a thousand or ten million rows. The learning
    rate follows a cosine from ``lr`` to zero over ``steps`` (Loshchilov &
    Hutter 2017, from memory), so the end point is the result. Deterministic
    for a given seed on the CPU.

    Parameters
    ----------
    model : InterventionalVGAE
        Trained in place (its initial weights are expected to be seeded by the caller).
    batch : FamilyBatch
        The cells laid out for ``model``.
    weight : numpy.ndarray
        ``[C]`` rows per cell (e.g. the rows outside one fold).
    group_weight : sequence of numpy.ndarray
        Per confounded component, rows per configuration.
    steps, lr, weight_decay : training settings (Adam).
    seed : int
        Seeds the reparameterisation noise (a generator of its own, so
        models trained side by side in threads repeat exactly).
    rows : float, optional
        Number of rows behind ``weight``, to report the ELBO per row.
    keep_best_every : int
        If above 0: every this many steps (and at the end) score the weights
        by the rows' log-likelihood under the decoder with z at its prior
        mean (deterministic, see :func:`~intervgnn.models.vgae.family_elbo`)
        and keep the best-scoring weights, not simply the last. A guard for
        mixtures, which can drift from a good fit into a degenerate one.
    on_step : callable, optional
        Called as ``on_step(step, elbo_per_row)`` after each step (progress bars).

    Returns
    -------
    TrainResult
    """
    t0 = time.perf_counter()
    dev = batch.node.device
    w = torch.as_tensor(weight, dtype=torch.float32, device=dev)
    gw = [torch.as_tensor(g, dtype=torch.float32, device=dev) for g in group_weight]
    # the loss is the ELBO per counted family term (its scale, and so the step sizes, do not grow with
    # the rows); the history reports it per row
    scale = max(float(np.asarray(weight).sum()), 1.0)
    per_row = float(rows) if rows else scale
    result = TrainResult(rows=per_row, cells=int(np.count_nonzero(weight)))
    gen = torch.Generator(device=dev).manual_seed(int(seed))
    params = list(model.parameters())
    opt = _adam(params, lr, weight_decay)
    best_score, best_weights = -math.inf, None

    def checkpoint(step: int) -> None:
        nonlocal best_score, best_weights
        model.eval()
        with torch.no_grad():
            score = float(family_elbo(model, batch, w, gw, prior_mean=True)) / per_row
        model.train()
        result.checkpoints.append((step, score))
        if score > best_score:
            best_score, best_weights = score, [p.detach().clone() for p in params]

    model.train()
    for step in range(1, steps + 1):
        for group in opt.param_groups:
            group["lr"] = _cosine(lr, step, steps)
        elbo = family_elbo(model, batch, w, gw, gen)
        loss = -elbo / scale
        opt.zero_grad(set_to_none=True)
        loss.backward()
        opt.step()
        value = float(elbo.detach()) / per_row
        result.history.append(value)
        if keep_best_every and (step % keep_best_every == 0 or step == steps):
            checkpoint(step)
        if on_step is not None:
            on_step(step, value)
    if best_weights is not None:
        with torch.no_grad():
            for p, keep in zip(params, best_weights):
                p.copy_(keep)
    model.eval()
    result.steps = steps
    result.seconds = time.perf_counter() - t0
    return result


def train_replicas(
    model: InterventionalVGAE,
    batch: FamilyBatch,
    weights: Sequence[np.ndarray],
    *,
    steps: int = 100,
    lr: float = 1e-2,
    weight_decay: float = 0.0,
    seeds: Sequence[int] = (),
    rows: Sequence[float] = (),
    on_step: Callable[[int, float], None] | None = None,
) -> list[TrainResult]:
    """:func:`train_vgae` for a model of stacked replicas (:func:`~intervgnn.models.replicas.stack_models`).

    Replica ``r`` maximises the ELBO of ``weights[r]`` with its own
    reparameterisation noise (``seeds[r]``); the loss is the sum of the
    replicas' losses, each scaled as :func:`train_vgae` scales it, and the
    gradients of the blocks off the diagonal are zeroed before each step, so
    every replica follows the steps it would take trained alone (up to float
    rounding: Adam is element-wise). One result per replica; ``on_step``
    gets the replicas' mean ELBO per row.
    """
    t0 = time.perf_counter()
    dev = batch.node.device
    r = model.replicas
    w = torch.as_tensor(np.stack([np.asarray(x, dtype=np.float64) for x in weights]), dtype=torch.float32, device=dev)
    scale = torch.as_tensor([max(float(np.asarray(x).sum()), 1.0) for x in weights], dtype=torch.float32, device=dev)
    per_row = [float(n) if n else float(scale[i]) for i, n in enumerate(rows or [None] * r)]
    results = [TrainResult(rows=per_row[i], cells=int(np.count_nonzero(weights[i]))) for i in range(r)]
    gens = [torch.Generator(device=dev).manual_seed(int(s)) for s in (seeds or range(r))]
    opt = _adam(list(model.parameters()), lr, weight_decay)
    model.train()
    for step in range(1, steps + 1):
        for group in opt.param_groups:
            group["lr"] = _cosine(lr, step, steps)
        elbo = family_elbo(model, batch, w, (), gens)
        loss = -(elbo / scale).sum()
        opt.zero_grad(set_to_none=True)
        loss.backward()
        mask_replica_grads(model)
        opt.step()
        values = elbo.detach().tolist()
        for i in range(r):
            results[i].history.append(values[i] / per_row[i])
        if on_step is not None:
            on_step(step, sum(res.history[-1] for res in results) / r)
    model.eval()
    seconds = time.perf_counter() - t0
    for res in results:  # each replica's share of the joint time, so that the results' seconds add up to it
        res.steps, res.seconds = steps, seconds / r
    return results
