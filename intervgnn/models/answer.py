"""Answering queries with a trained VGAE: tabulated CPTs (exact mode) or ancestral sampling."""

from __future__ import annotations

from collections.abc import Mapping, Sequence

import numpy as np
import torch

from ..errors import ZeroEvidenceError
from ..graph import CausalGraph
from .vgae import InterventionalVGAE

__all__ = ["tabulate_cpts", "table_rows_needed", "monte_carlo", "latent_name"]

_CHUNK_ROWS = 16384


def latent_name(group: int) -> str:
    """Name of a group's latent in a tabulated network (not a valid BIF name, so it cannot clash)."""
    return f"⟨hidden cause {group}⟩"


def table_rows_needed(graph: CausalGraph, cards: Mapping[str, int], u_states: int = 1) -> int:
    """Largest number of parent configurations over the nodes (the size exact mode must tabulate).

    A node that shares a hidden common cause counts the group latent's
    ``u_states`` states as one more parent.
    """
    confounded = {v for comp in graph.c_components() if len(comp) > 1 for v in comp}
    worst = 1
    for v in graph.nodes:
        size = u_states if v in confounded else 1
        for p in graph.parents(v):
            size *= cards[p]
        worst = max(worst, size)
    return worst


@torch.no_grad()
def tabulate_cpts(
    model: InterventionalVGAE,
    graph: CausalGraph,
    cards: Mapping[str, int],
    samples: int = 64,
    seed: int = 0,
) -> tuple[CausalGraph, dict[str, int], dict[str, np.ndarray]]:
    r"""Each node's conditional from the decoder, for every parent configuration.

    :math:`p(x_i \mid \mathrm{pa}) = \frac{1}{S} \sum_s \mathrm{softmax}(\mathrm{logits}_i(\mathrm{pa}, z_s))`
    with :math:`z_s` drawn from the prior (Monte Carlo integration of z).
    A group latent :math:`u_g` (discrete, with a learned prior) is kept as a
    node: a root variable with the prior as its CPT and a parent of every
    member, so the result is an ordinary discrete network over the observed
    variables and these latent nodes, ready for the exact engine (an
    intervention on a member cuts its edge from the latent like any parent
    edge).

    Returns
    -------
    (graph, cards, cpts)
        The (possibly augmented) graph, the number of states of every node,
        and CPTs with axes ``(*parents, v)``.
    """
    model.eval()
    gen = torch.Generator().manual_seed(int(seed))
    nodes = graph.nodes
    col = {v: j for j, v in enumerate(nodes)}
    dev = model.state_emb.weight.device
    groups = model.groups
    group_of = {nodes[i]: gi for gi, g in enumerate(groups) for i in g}
    n_states = model.u_states if groups else 1
    all_cards = dict(cards)
    cpts: dict[str, np.ndarray] = {}
    for v in nodes:
        pa = list(graph.parents(v))
        pcards = [cards[p] for p in pa]
        n_cfg = int(np.prod(pcards)) if pa else 1
        grid = np.zeros((n_cfg, len(nodes)), dtype=np.int64)
        if pa:
            mesh = np.stack(np.unravel_index(np.arange(n_cfg), pcards), axis=1)
            for k, p in enumerate(pa):
                grid[:, col[p]] = mesh[:, k]
        g = group_of.get(v)
        n_u = n_states if g is not None else 1
        probs = np.zeros((n_cfg, n_u, cards[v]))
        per = samples * n_u
        reps = max(1, _CHUNK_ROWS // max(per, 1))
        for start in range(0, n_cfg, reps):
            block = torch.as_tensor(grid[start : start + reps], device=dev)
            b = block.size(0)
            codes = block.repeat_interleave(per, dim=0)
            z = model.prior_sample(codes.size(0), gen)
            u = None
            if groups:
                # row r has every group latent in state (r // samples) % n_u (v hears only its own)
                which = (torch.arange(codes.size(0), device=dev) // samples) % n_u
                u = which.unsqueeze(-1).expand(-1, len(groups)).contiguous()
            logits = model.decode(codes, z, None, u)[:, col[v], : cards[v]]
            p = torch.softmax(logits, dim=-1).view(b, n_u, samples, -1).mean(2)
            probs[start : start + b] = p.double().cpu().numpy()
        probs /= probs.sum(axis=-1, keepdims=True)
        if g is None:
            cpts[v] = probs.reshape(pcards + [cards[v]])
        else:
            cpts[v] = probs.reshape(pcards + [n_u, cards[v]])
    if not groups:
        return graph, all_cards, cpts
    edges = list(graph.edges)
    for gi, g in enumerate(groups):
        name = latent_name(gi)
        all_cards[name] = n_states
        prior = torch.softmax(model.u_prior.detach().cpu().double()[gi], dim=-1).numpy()
        cpts[name] = prior / prior.sum()
        edges.extend((name, nodes[i]) for i in g)
    # latent nodes first, then the observed ones; a member's parents are (*its parents, its latent)
    ordered = [(p, c) for p, c in edges if p not in {latent_name(i) for i in range(len(groups))}]
    latent_edges = [(p, c) for p, c in edges if p in {latent_name(i) for i in range(len(groups))}]
    aug = CausalGraph(ordered + latent_edges, nodes=[latent_name(i) for i in range(len(groups))] + list(nodes))
    return aug, all_cards, cpts


@torch.no_grad()
def monte_carlo(
    model: InterventionalVGAE,
    graph: CausalGraph,
    cards: Mapping[str, int],
    targets: Sequence[str],
    do: Mapping[str, int],
    given: Mapping[str, int],
    samples: int = 20000,
    seed: int = 0,
    cut: bool = True,
) -> np.ndarray:
    """P(targets | do, given) by ancestral sampling through the mutilated graph.

    z (and every group's u) is drawn from the prior; the graph is walked
    generation by generation, vectorised over ``samples`` rows. Intervened
    nodes are set, and their parent and hidden-cause edges cut when ``cut``;
    evidence nodes are set and weight each sample by their likelihood
    (likelihood weighting). With ``cut=False`` the intervened nodes are
    treated as evidence (the ablation).

    Raises
    ------
    ZeroEvidenceError
        If every sample has weight zero.
    """
    model.eval()
    gen = torch.Generator().manual_seed(int(seed))
    nodes = graph.nodes
    col = {v: j for j, v in enumerate(nodes)}
    dev = model.state_emb.weight.device
    evidence = dict(given)
    fixed = dict(do)
    if not cut:
        evidence.update(fixed)
        fixed = {}
    codes = torch.zeros(samples, len(nodes), dtype=torch.long, device=dev)
    mask = torch.zeros(samples, len(nodes), dtype=torch.bool, device=dev)
    for v, c in fixed.items():
        codes[:, col[v]] = c
        mask[:, col[v]] = True
    for v, c in evidence.items():
        codes[:, col[v]] = c
    log_w = torch.zeros(samples, dtype=torch.float64, device=dev)
    z = model.prior_sample(samples, gen)
    u = model.prior_sample_u(samples, gen)
    for generation in graph.generations():
        todo = [v for v in generation if v not in fixed]
        if not todo:
            continue
        logits = model.decode(codes, z, mask if cut else None, u)
        for v in todo:
            j = col[v]
            lp = torch.log_softmax(logits[:, j, : cards[v]], dim=-1)
            if v in evidence:
                log_w += lp[:, evidence[v]].double()
            else:
                r = torch.rand(samples, generator=gen).to(dev)
                cdf = lp.exp().cumsum(-1)
                codes[:, j] = torch.searchsorted(cdf, r.unsqueeze(-1).to(cdf.dtype)).squeeze(-1).clamp_max(cards[v] - 1)
    if torch.isneginf(log_w).all():
        raise ZeroEvidenceError("the evidence has probability zero under the learned model")
    w = torch.exp(log_w - log_w.max())
    shape = [cards[t] for t in targets]
    flat = torch.zeros(samples, dtype=torch.long, device=dev)
    for t in targets:
        flat = flat * cards[t] + codes[:, col[t]]
    out = torch.zeros(int(np.prod(shape)), dtype=torch.float64, device=dev).index_add_(0, flat, w)
    out = out / out.sum()
    return out.cpu().numpy().reshape(shape)
