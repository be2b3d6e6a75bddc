"""Answering queries with trained VGAEs: tabulated conditionals (exact mode) or ancestral sampling."""

from __future__ import annotations

from collections.abc import Callable, Mapping, Sequence

import numpy as np
import torch

from ..errors import ZeroEvidenceError
from ..graph import CausalGraph
from .vgae import InterventionalVGAE, family_edges

__all__ = ["conditionals", "normal_points", "tabulate_cpts", "table_rows_needed", "monte_carlo", "latent_name"]

#: decoder items per pass (bounds memory whatever the network)
_CHUNK_ITEMS = 16384


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


def normal_points(samples: int, dim: int, seed: int = 0) -> torch.Tensor:
    """``[samples, dim]`` points for averaging over :math:`N(0, I)`: a scrambled Sobol sequence, mapped by the inverse CDF.

    Quasi-Monte Carlo (Owen-scrambled Sobol points; Owen 1997,
    "Scrambled net variance for integrals of smooth functions", Ann. Stat.
    25(4)): for a smooth integrand its error shrinks much faster with the
    number of points than that of independent draws, so a few points do the
    work of many random ones. Seeded: the same seed gives the same points.
    """
    engine = torch.quasirandom.SobolEngine(dim, scramble=True, seed=int(seed))
    u = engine.draw(int(samples), dtype=torch.float64).clamp(1e-7, 1 - 1e-7)
    return (torch.special.ndtri(u)).float()


@torch.no_grad()
def conditionals(
    model: InterventionalVGAE,
    parents: Sequence[Sequence[int]],
    node: np.ndarray,
    cfg: np.ndarray,
    samples: int = 64,
    seed: int = 0,
    u: np.ndarray | None = None,
) -> np.ndarray:
    r"""The decoder's conditional of each item, z integrated out over the prior.

    :math:`p(x \mid \mathrm{pa}) = \frac{1}{S} \sum_s \mathrm{softmax}(\mathrm{logits}(\mathrm{pa}, z_s))`
    over ``samples`` points :math:`z_s` that cover :math:`N(0, I)` evenly
    (see :func:`normal_points`; the same points for every item), for items given as (node index, parent
    configuration in mixed radix over ``parents[node]``), optionally with the
    state ``u`` of the node's component latent (-1: none).

    Returns
    -------
    numpy.ndarray
        ``[D, K_max]`` float64 probabilities (zero beyond each node's states).
    """
    model.eval()
    node = np.asarray(node, dtype=np.int64)
    cfg = np.asarray(cfg, dtype=np.int64)
    d = node.size
    out = np.zeros((d, max(model.cards)))
    if d == 0:
        return out
    dev = model.state_emb.weight.device
    points = normal_points(samples, model.z_dim, seed).to(dev)
    values = model.values()
    per = max(1, _CHUNK_ITEMS // max(samples, 1))
    for start in range(0, d, per):
        sl = slice(start, min(d, start + per))
        b = sl.stop - sl.start
        rep_node = np.repeat(node[sl], samples)
        rep_cfg = np.repeat(cfg[sl], samples)
        edges = torch.as_tensor(family_edges(parents, model.cards, rep_node, rep_cfg), device=dev)
        z = points.repeat(b, 1)
        uu = None if u is None else torch.as_tensor(np.repeat(np.asarray(u)[sl], samples), device=dev)
        logits = model.decode_families(torch.as_tensor(rep_node, device=dev), z, edges, uu, values)
        p = torch.softmax(logits.double(), dim=-1).view(b, samples, -1).mean(1)
        out[sl] = p.cpu().numpy()
    out /= out.sum(axis=1, keepdims=True)
    return out


@torch.no_grad()
def tabulate_cpts(
    model: InterventionalVGAE,
    graph: CausalGraph,
    cards: Mapping[str, int],
    samples: int = 64,
    seed: int = 0,
) -> tuple[CausalGraph, dict[str, int], dict[str, np.ndarray]]:
    r"""Each node's conditional from the decoder, for every parent configuration.

    z is integrated out by Monte Carlo over the prior (see
    :func:`conditionals`). A group latent :math:`u_g` (discrete, with a
    learned prior) is kept as a node: a root variable with the prior as its
    CPT and a parent of every member, so the result is an ordinary discrete
    network over the observed variables and these latent nodes, ready for
    the exact engine (an intervention on a member cuts its edge from the
    latent like any parent edge).

    Returns
    -------
    (graph, cards, cpts)
        The (possibly augmented) graph, the number of states of every node,
        and CPTs with axes ``(*parents, v)`` (members: ``(*parents, latent, v)``).
    """
    nodes = graph.nodes
    index = {v: i for i, v in enumerate(nodes)}
    parents = [[index[p] for p in graph.parents(v)] for v in nodes]
    groups = model.groups
    group_of = {nodes[i]: gi for gi, g in enumerate(groups) for i in g}
    n_u = model.u_states if groups else 1
    item_node, item_cfg, item_u = [], [], []
    shapes = {}
    for v in nodes:
        pcards = [cards[p] for p in graph.parents(v)]
        n_cfg = int(np.prod(pcards)) if pcards else 1
        us = n_u if v in group_of else 1
        item_node.append(np.full(n_cfg * us, index[v]))
        item_cfg.append(np.repeat(np.arange(n_cfg), us))
        item_u.append(np.tile(np.arange(us), n_cfg) if v in group_of else np.full(n_cfg, -1))
        shapes[v] = pcards + ([n_u] if v in group_of else []) + [cards[v]]
    probs = conditionals(
        model, parents, np.concatenate(item_node), np.concatenate(item_cfg), samples, seed,
        np.concatenate(item_u) if groups else None,
    )
    cpts: dict[str, np.ndarray] = {}
    start = 0
    for v in nodes:
        size = int(np.prod(shapes[v][:-1]))
        block = probs[start : start + size, : cards[v]]
        cpts[v] = (block / block.sum(axis=1, keepdims=True)).reshape(shapes[v])
        start += size
    all_cards = dict(cards)
    if not groups:
        return graph, all_cards, cpts
    latents = [latent_name(i) for i in range(len(groups))]
    for gi, g in enumerate(groups):
        all_cards[latents[gi]] = n_u
        prior = torch.softmax(model.u_prior.detach().cpu().double()[gi], dim=-1).numpy()
        cpts[latents[gi]] = prior / prior.sum()
    # latent nodes first; a member's parents are (*its parents, its latent)
    edges = list(graph.edges) + [(latents[gi], nodes[i]) for gi, g in enumerate(groups) for i in g]
    aug = CausalGraph(edges, nodes=latents + list(nodes))
    return aug, all_cards, cpts


@torch.no_grad()
def monte_carlo(
    conditional: Callable[[str, np.ndarray], np.ndarray],
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

    ``conditional(v, codes)`` gives node ``v``'s distribution ``[S, k_v]``
    for the sampled rows ``codes [S, N]`` (its parents' columns are filled
    in when it is called; it may draw its own latent noise). The graph is
    walked generation by generation, vectorised over ``samples`` rows.
    Intervened nodes are set (their parents are then irrelevant: the cut);
    evidence nodes are set and weight each sample by their probability
    (likelihood weighting). With ``cut=False`` the intervened nodes are
    treated as evidence (the ablation).

    Raises
    ------
    ZeroEvidenceError
        If every sample has weight zero.
    """
    rng = np.random.default_rng(int(seed))
    nodes = graph.nodes
    col = {v: j for j, v in enumerate(nodes)}
    evidence = dict(given)
    fixed = dict(do)
    if not cut:
        evidence.update(fixed)
        fixed = {}
    codes = np.zeros((samples, len(nodes)), dtype=np.int64)
    for v, c in {**fixed, **evidence}.items():
        codes[:, col[v]] = c
    log_w = np.zeros(samples)
    for generation in graph.generations():
        for v in generation:
            if v in fixed:
                continue
            p = conditional(v, codes)
            if v in evidence:
                with np.errstate(divide="ignore"):
                    log_w += np.log(p[:, evidence[v]])
            else:
                cdf = np.cumsum(p, axis=1)
                r = rng.random(samples)[:, None] * cdf[:, -1:]
                codes[:, col[v]] = np.minimum((r > cdf).sum(axis=1), cards[v] - 1)
    if np.isneginf(log_w).all():
        raise ZeroEvidenceError("the evidence has probability zero under the learned model")
    w = np.exp(log_w - log_w.max())
    shape = [cards[t] for t in targets]
    flat = np.zeros(samples, dtype=np.int64)
    for t in targets:
        flat = flat * cards[t] + codes[:, col[t]]
    out = np.bincount(flat, weights=w, minlength=int(np.prod(shape)))
    return (out / out.sum()).reshape(shape)
