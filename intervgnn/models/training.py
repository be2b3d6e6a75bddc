"""Training the interventional VGAE: Adam, minibatches over rows, early stopping."""

from __future__ import annotations

import copy
import math
from dataclasses import dataclass, field

import numpy as np
import torch

from .vgae import InterventionalVGAE, elbo_terms

__all__ = ["TrainResult", "train_vgae"]


@dataclass
class TrainResult:
    """What training did: per-epoch history and the epoch whose weights were kept."""

    history: list[dict] = field(default_factory=list)
    best_epoch: int = 0
    best_val_elbo: float = -math.inf
    seconds: float = 0.0


def _validation(model, codes, mask, regime_aware, use_cut) -> float:
    """Mean ELBO per held-out row."""
    model.eval()
    total = 0.0
    with torch.no_grad():
        for start in range(0, codes.size(0), 4096):
            c = codes[start : start + 4096]
            m = mask[start : start + 4096]
            logits, lat = model(c, m if use_cut else None)
            elbo, _, _ = elbo_terms(logits, c, lat, m, regime_aware)
            total += float(elbo.sum())
    return total / max(codes.size(0), 1)


class _Average:
    """Exponential moving average of a model's floating-point weights (Polyak averaging)."""

    def __init__(self, model: torch.nn.Module, decay: float):
        self.decay = decay
        self.params = [p for p in model.parameters()]
        self.shadow = [p.detach().clone() for p in self.params]

    @torch.no_grad()
    def update(self) -> None:
        for s, p in zip(self.shadow, self.params):
            s.lerp_(p.detach(), 1.0 - self.decay)

    @torch.no_grad()
    def swap(self) -> None:
        """Exchange the live weights and the averaged ones."""
        for s, p in zip(self.shadow, self.params):
            tmp = p.detach().clone()
            p.copy_(s)
            s.copy_(tmp)


def _epoch(model, opt, codes, mask, batch_size, gen, regime_aware, use_cut, average=None) -> float:
    """One pass over the rows in a seeded random order; returns the mean training ELBO."""
    model.train()
    perm = torch.randperm(codes.size(0), generator=gen).to(codes.device)
    run = 0.0
    for start in range(0, codes.size(0), batch_size):
        b = perm[start : start + batch_size]
        c, m = codes[b], mask[b]
        logits, lat = model(c, m if use_cut else None)
        elbo, _, _ = elbo_terms(logits, c, lat, m, regime_aware)
        loss = -elbo.mean()
        opt.zero_grad(set_to_none=True)
        loss.backward()
        opt.step()
        if average is not None:
            average.update()
        run += float(elbo.sum().detach())
    return run / max(codes.size(0), 1)


def train_vgae(
    model: InterventionalVGAE,
    codes: np.ndarray,
    intervened: np.ndarray,
    *,
    epochs: int = 300,
    batch_size: int = 512,
    lr: float = 1e-2,
    weight_decay: float = 0.0,
    val_fraction: float = 0.1,
    patience: int = 30,
    lr_patience: int | None = 5,
    refit: bool = True,
    average: float | None = 0.98,
    seed: int = 0,
    regime_aware: bool = True,
    use_cut: bool = True,
    device: str | torch.device = "cpu",
    progress: bool = False,
) -> TrainResult:
    """Fit ``model`` by maximising the intervention-aware ELBO with Adam on minibatches of rows.

    Phase one trains on ``1 - val_fraction`` of the rows, halving the
    learning rate after ``lr_patience`` epochs without a better held-out
    ELBO and stopping after ``patience`` such epochs. With ``refit`` the
    model is then trained again from its initial weights on *all* rows for
    the best number of epochs, with the learning rate halved at the same
    epochs (so no row is lost to the held-out split); otherwise the weights
    of the best held-out epoch are kept.

    Parameters
    ----------
    model : InterventionalVGAE
        Trained in place (its initial weights are expected to be seeded by the caller).
    codes, intervened : numpy.ndarray
        Rows ``[n, N]`` of state codes and the per-row regime mask.
    epochs, batch_size, lr, weight_decay : training settings (Adam).
    val_fraction : float
        Share of rows held out for early stopping (0 trains for ``epochs`` on all rows).
    patience : int
        Stop after this many epochs without a better held-out ELBO.
    lr_patience : int or None
        Halve the learning rate after this many epochs without a better
        held-out ELBO (None: constant learning rate).
    refit : bool
        Retrain on all rows for the best number of epochs (see above).
    average : float or None
        Decay of an exponential moving average of the weights, updated after
        every step; the averaged weights are the ones validated and kept
        (None: the raw weights).
    seed : int
        Seeds the split, the batch order and the reparameterisation noise.
    regime_aware : bool
        False gives the regime-blind ELBO (intervened nodes counted as if observed).
    use_cut : bool
        False passes no intervened mask to the layers (the ablation).
    device : str or torch.device
        Where to train (CPU by default; never required).
    progress : bool
        Show a tqdm bar with epoch, ELBO and held-out ELBO.
    """
    import time

    t0 = time.perf_counter()
    torch.manual_seed(int(seed) + 1)  # reparameterisation noise
    rng = np.random.default_rng(seed)
    n = codes.shape[0]
    n_val = min(int(round(val_fraction * n)), n - 1) if n >= 2 and val_fraction > 0 else 0
    if val_fraction > 0 and n >= 2:
        n_val = max(n_val, 1)
    order = rng.permutation(n)
    dev = torch.device(device)
    model.to(dev)
    c_all = torch.as_tensor(np.array(codes, dtype=np.int64), device=dev)
    m_all = torch.as_tensor(np.array(intervened, dtype=bool), device=dev)
    val_idx = torch.as_tensor(order[:n_val], device=dev)
    tr_idx = torch.as_tensor(order[n_val:], device=dev)
    c_tr, m_tr, c_va, m_va = c_all[tr_idx], m_all[tr_idx], c_all[val_idx], m_all[val_idx]
    init_state = copy.deepcopy(model.state_dict())
    result = TrainResult()
    bar = None
    if progress:
        from tqdm.auto import tqdm

        bar = tqdm(total=epochs, desc="training", unit="epoch", leave=False)
    gen = torch.Generator(device="cpu").manual_seed(int(seed))
    opt = torch.optim.Adam(model.parameters(), lr=lr, weight_decay=weight_decay)
    best_state = copy.deepcopy(model.state_dict())
    decays: list[int] = []  # epochs after which the learning rate was halved
    stale = stale_lr = 0
    avg = _Average(model, average) if average else None
    for epoch in range(1, epochs + 1):
        train_elbo = _epoch(model, opt, c_tr, m_tr, batch_size, gen, regime_aware, use_cut, avg)
        if avg is not None:
            avg.swap()
        val_elbo = _validation(model, c_va, m_va, regime_aware, use_cut) if n_val else train_elbo
        result.history.append({"phase": "select", "epoch": epoch, "elbo": train_elbo, "val_elbo": val_elbo})
        improved = val_elbo > result.best_val_elbo + 1e-6 or not n_val
        if improved:
            best_state = copy.deepcopy(model.state_dict())
        if avg is not None:
            avg.swap()
        if improved:
            result.best_val_elbo, result.best_epoch = val_elbo, epoch
            stale = stale_lr = 0
        else:
            stale += 1
            stale_lr += 1
            if lr_patience is not None and stale_lr >= lr_patience:
                for group in opt.param_groups:
                    group["lr"] *= 0.5
                decays.append(epoch)
                stale_lr = 0
        if bar is not None:
            bar.set_postfix(elbo=f"{train_elbo:.3f}", val=f"{val_elbo:.3f}")
            bar.update(1)
        if stale >= patience:
            break
    if refit and n_val:
        model.load_state_dict(init_state)
        opt = torch.optim.Adam(model.parameters(), lr=lr, weight_decay=weight_decay)
        if bar is not None:
            bar.reset(total=result.best_epoch)
            bar.set_description("refit on all rows")
        avg = _Average(model, average) if average else None
        for epoch in range(1, result.best_epoch + 1):
            train_elbo = _epoch(model, opt, c_all, m_all, batch_size, gen, regime_aware, use_cut, avg)
            result.history.append({"phase": "refit", "epoch": epoch, "elbo": train_elbo, "val_elbo": None})
            if epoch in decays:
                for group in opt.param_groups:
                    group["lr"] *= 0.5
            if bar is not None:
                bar.set_postfix(elbo=f"{train_elbo:.3f}")
                bar.update(1)
        if avg is not None:
            avg.swap()
    else:
        model.load_state_dict(best_state)
    if bar is not None:
        bar.close()
    model.eval()
    result.seconds = time.perf_counter() - t0
    return result
