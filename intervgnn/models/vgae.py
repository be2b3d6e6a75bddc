"""The G-constrained interventional variational graph autoencoder."""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass, field
from typing import NamedTuple

import numpy as np
import torch
from torch import Tensor

from ..nn import InterventionalConv

__all__ = ["InterventionalVGAE", "Latents", "FamilyBatch", "elbo_terms", "family_edges", "family_elbo"]

_LOGSTD_MIN, _LOGSTD_MAX = -6.0, 3.0


class Latents(NamedTuple):
    """What the encoder returns: samples and posterior parameters of each node's z.

    ``z, mu, logstd`` are ``[B, N, z_dim]``. With confounded groups,
    ``group_logprior [G, S]`` is the log prior of each group's hidden state
    and ``member [G, N]`` the group membership (their posteriors are exact,
    computed from the decoder in :func:`elbo_terms`).
    """

    z: Tensor
    mu: Tensor
    logstd: Tensor
    group_logprior: Tensor | None = None
    member: Tensor | None = None


def family_edges(parents, cards, node: np.ndarray, cfg: np.ndarray) -> np.ndarray:
    """Parent -> child edges ``[2, E]`` of a batch of small family graphs (stars).

    Item ``j`` is node ``node[j]`` in parent configuration ``cfg[j]`` (mixed
    radix over ``parents[node[j]]``, first parent most significant). Sources
    are *value nodes*, one per (variable, state) numbered as in
    :attr:`InterventionalVGAE.offsets`; the target of item ``j`` is item
    ``j`` (a bipartite graph: value nodes -> items). Each item receives one
    message per parent, from the value node of that parent's state, exactly
    as node ``node[j]`` does in a row.
    """
    offsets = np.concatenate([[0], np.cumsum(cards)[:-1]]).astype(np.int64)
    src, dst = [], []
    node = np.asarray(node, dtype=np.int64)
    cfg = np.asarray(cfg, dtype=np.int64)
    for v in np.unique(node):
        pa = list(parents[int(v)])
        if not pa:
            continue
        items = np.flatnonzero(node == v)
        rest = cfg[items].copy()
        for p in reversed(pa):  # least significant parent last in the radix
            rest, s = np.divmod(rest, cards[p])
            src.append(offsets[p] + s)
            dst.append(items)
    if not src:
        return np.zeros((2, 0), dtype=np.int64)
    return np.stack([np.concatenate(src), np.concatenate(dst)])


@dataclass
class FamilyBatch:
    """Cells of :class:`~intervgnn.models.stats.FamilyCells` as tensors for one full-batch pass.

    Every cell is a small family graph: a star from the value nodes of its
    parents' states into the cell. The encoder runs once per cell; the
    decoder once per cell outside confounded components and once per state
    of the component's latent for member cells (``dec_*``).
    """

    node: Tensor  # [C] node of each cell
    state: Tensor  # [C] own state of each cell
    enc_edges: Tensor  # [2, E] value nodes -> T + cell
    dec_cell: Tensor  # [D] cell decoded by each decoder item
    dec_u: Tensor  # [D] latent state heard by the item (-1: none)
    dec_edges: Tensor  # [2, E'] value nodes -> decoder items (bipartite)
    free_item: Tensor  # [C] decoder item of a cell outside every component (-1 for members)
    member_item: Tensor  # [C, S] decoder items of a member cell per latent state (-1 otherwise)
    group_cell: list[Tensor] = field(default_factory=list)  # per component: [R, m] cell ids (-1 intervened)
    group_id: list[int] = field(default_factory=list)
    is_member: Tensor | None = None  # [C] bool
    free_cells: Tensor | None = None  # indices of the cells outside every component
    # fixed for the batch, looked up once instead of at every training step
    free_items: Tensor | None = None  # [F] decoder item of each cell in ``free_cells``
    all_free: bool = False  # no cell in a component: free_cells and free_items are 0..C-1
    own_value: Tensor | None = None  # [C] value node of each cell's own state
    dec_node: Tensor | None = None  # [D] node of each decoder item
    dec_state: Tensor | None = None  # [D] own state of each decoder item
    enc_attr: Tensor | None = None  # [E, edge_dim] features of enc_edges (models built with edge_dim)
    dec_attr: Tensor | None = None  # [E', edge_dim] features of dec_edges

    @classmethod
    def from_cells(cls, model: InterventionalVGAE, cells) -> FamilyBatch:
        """Lay out ``cells`` (:class:`~intervgnn.models.stats.FamilyCells`) for ``model``."""
        node, cfg, state = cells.node, cells.cfg, cells.state
        n_cells = int(node.size)
        enc = family_edges(cells.parents, cells.cards, node, cfg)
        member_group = model.node_group.cpu().numpy()
        is_member = member_group[node] >= 0 if n_cells else np.zeros(0, dtype=bool)
        s = model.u_states if model.num_groups else 1
        free = np.flatnonzero(~is_member)
        members = np.flatnonzero(is_member)
        dec_cell = np.concatenate([free, np.repeat(members, s)])
        dec_u = np.concatenate([np.full(free.size, -1), np.tile(np.arange(s), members.size)])
        free_item = np.full(n_cells, -1, dtype=np.int64)
        free_item[free] = np.arange(free.size)
        member_item = np.full((n_cells, s), -1, dtype=np.int64)
        member_item[members] = free.size + np.arange(members.size * s).reshape(members.size, s)
        dec = family_edges(cells.parents, cells.cards, node[dec_cell], cfg[dec_cell])
        dev = model.offsets.device
        as_t = lambda a: torch.as_tensor(np.ascontiguousarray(a), dtype=torch.long, device=dev)  # noqa: E731
        index = {g: i for i, g in enumerate(model.groups)}
        return cls(
            node=as_t(node), state=as_t(state), enc_edges=as_t(enc),
            dec_cell=as_t(dec_cell), dec_u=as_t(dec_u), dec_edges=as_t(dec),
            free_item=as_t(free_item), member_item=as_t(member_item),
            group_cell=[as_t(g.cell) for g in cells.groups],
            group_id=[index[tuple(g.members)] for g in cells.groups],
            is_member=torch.as_tensor(is_member, device=dev),
            free_cells=as_t(free),
            free_items=as_t(free_item[free]),
            all_free=bool(members.size == 0),
            own_value=model.offsets[as_t(node)] + as_t(state),
            dec_node=as_t(node[dec_cell]),
            dec_state=as_t(state[dec_cell]),
        )


class InterventionalVGAE(torch.nn.Module):
    r"""Variational graph autoencoder whose decoder factorises along the causal graph.

    Node input is an embedding of (variable, state) plus an embedding of the
    node's mechanism. The encoder, an :class:`~intervgnn.nn.InterventionalConv`,
    gives a Gaussian posterior :math:`q(z_i \mid x_i, x_{\mathrm{pa}(i)})`
    per node. The decoder, another interventional layer fed the pair
    (parents' value embeddings, own mechanism embedding + projected
    :math:`z_i`), gives logits for :math:`p(x_i \mid x_{\mathrm{pa}(i)}, z_i)`:
    node :math:`i`'s logits see only its parents' values and :math:`z_i`,
    never its own value, so one teacher-forced pass gives every node's
    conditional and the model factorises exactly like the causal model.
    Variables may have different numbers of states: logits are padded to the
    largest and the padding is masked out.

    **Hidden common causes.** With ``groups`` (the confounded components of
    a diagram with bidirected edges), each group :math:`g` has a shared
    discrete latent :math:`u_g \in \{1, \dots, S\}` with a learned prior
    :math:`\pi_g`; the decoder of a member also sees an embedding of
    :math:`u_g`. Since :math:`u_g` has finitely many states its posterior
    :math:`q(u_g \mid x) = p(u_g \mid x_g, x_{\mathrm{pa}(g)}, z)` is
    computed exactly from the members' likelihoods (Bayes over the S
    states), so the ELBO's term for :math:`u_g`, likelihood minus
    :math:`\mathrm{KL}(q(u_g \mid x) \,\|\, \pi_g)`, is the exact
    log-marginal :math:`\log \sum_k \pi_{gk} \prod_{i \in g} p(x_i \mid
    \cdot, u_g = k)`: a latent-class (finite mixture) model per component,
    with no amortisation gap and no posterior collapse. A node set by
    intervention in a row is cut from its group's latent as from its parents
    and does not inform the group's posterior.

    Parameters
    ----------
    cards : sequence of int
        Number of states of each node, in node order.
    edge_index : torch.Tensor
        Parent -> child edges ``[2, E]``.
    mechanisms : sequence of int, optional
        Mechanism id per node (default: the node's own index). Nodes that
        share an id share the mechanism embedding.
    dim : int
        Size of the state and mechanism embeddings.
    hidden : int
        Width of the MLPs inside the layers.
    z_dim : int
        Size of each node's latent.
    num_layers : int
        Linear layers per MLP.
    encoder_hidden : int, optional
        Width of the encoder's MLPs (default: ``hidden``). The posterior of a
        node's latent given its own and its parents' values needs less width
        than the decoder.
    groups : sequence of sequences of int, optional
        Disjoint node sets sharing a hidden common cause (each of two or more nodes).
    u_states : int
        Number of states of each group's latent.
    edge_dim : int, optional
        Features per parent edge, for family batches whose edges carry them
        (``FamilyBatch.enc_attr`` / ``dec_attr``; the relational model's
        edges from related instances carry how many of them are in each
        state). The row-wise path (:meth:`encode`, :meth:`decode`) has no
        edge features and needs ``edge_dim=None``.

    Shapes
    ------
    codes ``[B, N]`` (long), intervened ``[B, N]`` (bool) -> logits ``[B, N, K_max]``
    (without groups) or ``[B, S, N, K_max]`` (with groups: one slice per
    state of the group latents).
    """

    def __init__(
        self,
        cards: Sequence[int],
        edge_index: Tensor,
        mechanisms: Sequence[int] | None = None,
        dim: int = 32,
        hidden: int = 64,
        z_dim: int = 4,
        num_layers: int = 2,
        encoder_hidden: int | None = None,
        groups: Sequence[Sequence[int]] = (),
        u_states: int = 4,
        edge_dim: int | None = None,
    ):
        super().__init__()
        cards = [int(c) for c in cards]
        self.cards = cards
        self.num_nodes = len(cards)
        self.dim, self.hidden, self.z_dim, self.num_layers = dim, hidden, z_dim, num_layers
        mech = list(range(len(cards))) if mechanisms is None else [int(m) for m in mechanisms]
        self.register_buffer("edge_index", edge_index.clone().long(), persistent=False)
        self.register_buffer("mechanism", torch.tensor(mech, dtype=torch.long), persistent=False)
        offsets = torch.tensor([0] + cards[:-1]).cumsum(0)
        self.register_buffer("offsets", offsets, persistent=False)
        k_max = max(cards)
        total = sum(cards)
        idx = torch.full((len(cards), k_max), total, dtype=torch.long)  # padding -> extra row
        valid = torch.zeros(len(cards), k_max, dtype=torch.bool)
        for v, c in enumerate(cards):
            idx[v, :c] = offsets[v] + torch.arange(c)
            valid[v, :c] = True
        self.register_buffer("state_index", idx, persistent=False)
        self.num_values = total
        value_node = torch.repeat_interleave(torch.arange(len(cards)), torch.tensor(cards))  # node of each value
        self.register_buffer("valid", valid, persistent=False)
        self.register_buffer("value_mechanism", self.mechanism[value_node], persistent=False)
        # confounded groups: membership [G, N] and each node's group (-1: none)
        self.groups = [tuple(int(i) for i in g) for g in groups]
        self.num_groups = len(self.groups)
        self.u_states = int(u_states)
        member = torch.zeros(self.num_groups, len(cards), dtype=torch.bool)
        node_group = torch.full((len(cards),), -1, dtype=torch.long)
        for gi, g in enumerate(self.groups):
            for i in g:
                member[gi, i] = True
                node_group[i] = gi
        self.register_buffer("member", member, persistent=False)
        self.register_buffer("node_group", node_group, persistent=False)
        self.encoder_hidden = encoder_hidden or hidden
        self.state_emb = torch.nn.Embedding(total, dim)
        self.mech_emb = torch.nn.Embedding(max(mech) + 1, dim)
        self.edge_dim = edge_dim
        self.encoder = InterventionalConv(
            dim, 2 * z_dim, hidden_channels=self.encoder_hidden, num_layers=num_layers, edge_dim=edge_dim
        )
        self.z_proj = torch.nn.Linear(z_dim, dim)
        if self.num_groups:
            self.u_prior = torch.nn.Parameter(torch.zeros(self.num_groups, self.u_states))
            self.u_emb = torch.nn.Parameter(torch.empty(self.num_groups, self.u_states, dim))
        self.decoder = InterventionalConv((dim, dim), hidden, hidden_channels=hidden, num_layers=num_layers, edge_dim=edge_dim)
        self.out_emb = torch.nn.Embedding(total + 1, hidden)
        self.out_bias = torch.nn.Embedding(total + 1, 1)
        self.replicas = 1  # models side by side on every feature axis (see intervgnn.models.replicas)
        self.reset_parameters()

    def set_replicas(self, replicas: int, dim: int, hidden: int, z_dim: int, encoder_hidden: int) -> None:
        """Read this model as ``replicas`` models of the given sizes side by side (block-diagonal layers).

        Used by :func:`~intervgnn.models.replicas.stack_models`; the family
        ELBO then returns one value per replica. Sizes are per replica.
        """
        self.replicas = int(replicas)
        self.rep_dim, self.rep_hidden, self.rep_z, self.rep_encoder_hidden = dim, hidden, z_dim, encoder_hidden

    def reset_parameters(self):
        torch.nn.init.normal_(self.state_emb.weight, std=0.5)
        torch.nn.init.normal_(self.mech_emb.weight, std=0.5)
        self.encoder.reset_parameters()
        self.z_proj.reset_parameters()
        # start at the collapsed posterior: q(z | .) = N(0, I) (the encoder's last layer is zero) and a
        # decoder that ignores z (zero projection). With discrete nodes a decoder that represents
        # p(x_i | x_pa(i)) exactly makes this the ELBO's optimum, and starting there keeps the
        # reparameterisation noise from swamping full-batch training.
        last = self.encoder.update_mlp.lins[-1]
        torch.nn.init.zeros_(last.weight)
        if last.bias is not None:
            torch.nn.init.zeros_(last.bias)
        torch.nn.init.zeros_(self.z_proj.weight)
        self.decoder.reset_parameters()
        torch.nn.init.normal_(self.out_emb.weight, std=0.1)
        torch.nn.init.zeros_(self.out_bias.weight)
        if self.num_groups:
            torch.nn.init.zeros_(self.u_prior)
            # distinct states from the start (a symmetric start would keep the mixture collapsed)
            torch.nn.init.normal_(self.u_emb, std=1.0)

    # ----------------------------------------------------------- pieces
    def value_embedding(self, codes: Tensor) -> Tensor:
        """Embedding of each node's (variable, state) plus its mechanism, ``[B, N, dim]``."""
        return self.state_emb(codes + self.offsets) + self.mech_emb(self.mechanism)

    def encode(self, codes: Tensor, intervened: Tensor | None) -> Latents:
        """Posterior samples and parameters of every node's z (plus the group priors)."""
        h = self.encoder(self.value_embedding(codes), self.edge_index, intervened)
        mu, logstd = h.split([self.z_dim, self.z_dim], dim=-1)
        logstd = logstd.clamp(_LOGSTD_MIN, _LOGSTD_MAX)
        z = mu + torch.randn_like(mu) * logstd.exp() if self.training else mu
        if not self.num_groups:
            return Latents(z, mu, logstd)
        return Latents(z, mu, logstd, torch.log_softmax(self.u_prior, dim=-1), self.member)

    def decode(self, codes: Tensor, z: Tensor, intervened: Tensor | None, u: Tensor | None = None) -> Tensor:
        """Logits ``[B, N, K_max]`` of p(x_i | x_pa(i), z_i[, u_g(i)]); padded states are ``-inf``.

        ``codes`` supplies the parents' values (teacher forcing); a node's own
        entry in ``codes`` never reaches its own logits. ``u [B, G]`` (long)
        gives each group latent's state; a member of a group sees it unless
        it is intervened in that row.
        """
        src = self.value_embedding(codes)
        dst = self.mech_emb(self.mechanism) + self.z_proj(z)
        if self.num_groups and u is not None:
            gidx = self.node_group.clamp_min(0)  # [N]
            state = u[:, gidx]  # [B, N]: the state of each node's group latent
            # an embedding lookup, not advanced indexing: the backward of
            # u_emb[g, state] accumulates with index_put_, whose order (and so
            # its float sum) varies between runs with more than one thread
            flat = self.u_emb.reshape(self.num_groups * self.u_states, -1)
            contrib = torch.nn.functional.embedding(gidx * self.u_states + state, flat)  # [B, N, dim]
            hears = (self.node_group >= 0).unsqueeze(0).expand(codes.size(0), -1)
            if intervened is not None:
                hears = hears & ~intervened
            dst = dst + contrib * hears.unsqueeze(-1).to(dst.dtype)
        h = self.decoder((src, dst), self.edge_index, intervened)
        w = self.out_emb(self.state_index)  # [N, K, H]
        logits = torch.einsum("bnh,nkh->bnk", h, w) + self.out_bias(self.state_index).squeeze(-1)
        return logits.masked_fill(~self.valid, float("-inf"))

    def forward(self, codes: Tensor, intervened: Tensor | None = None) -> tuple[Tensor, Latents]:
        """Encode then decode: ``(logits, latents)``.

        With groups the logits are ``[B, S, N, K_max]``: slice ``k`` has
        every group latent in state ``k`` (each node hears only its own
        group's latent, so these slices are all :func:`elbo_terms` needs).
        """
        lat = self.encode(codes, intervened)
        if not self.num_groups:
            return self.decode(codes, lat.z, intervened, None), lat
        b, n, s = codes.size(0), self.num_nodes, self.u_states
        rep = lambda t: t.unsqueeze(1).expand(b, s, *t.shape[1:]).reshape(b * s, *t.shape[1:])  # noqa: E731
        u = torch.arange(s, device=codes.device).repeat(b).unsqueeze(-1).expand(b * s, self.num_groups)
        logits = self.decode(rep(codes), rep(lat.z), None if intervened is None else rep(intervened), u)
        return logits.view(b, s, n, -1), lat

    def prior_sample(self, batch: int, generator: torch.Generator | None = None) -> Tensor:
        """z drawn from the prior N(0, I), ``[batch, N, z_dim]``."""
        dev = self.state_emb.weight.device
        return torch.randn(batch, self.num_nodes, self.z_dim, generator=generator, device="cpu").to(dev)

    def prior_sample_u(self, batch: int, generator: torch.Generator | None = None) -> Tensor | None:
        """Group latent states drawn from their priors, ``[batch, G]`` (None without groups)."""
        if not self.num_groups:
            return None
        probs = torch.softmax(self.u_prior.detach().cpu().double(), dim=-1)
        draws = torch.multinomial(probs, batch, replacement=True, generator=generator)  # [G, batch]
        return draws.t().contiguous().to(self.state_emb.weight.device)


    # ------------------------------------------------------ family graphs
    def values(self) -> Tensor:
        """Embedding of every (variable, state) plus its mechanism, ``[T, dim]`` (the value nodes)."""
        return self.state_emb.weight + self.mech_emb(self.value_mechanism)

    def encode_families(
        self,
        node: Tensor,
        state: Tensor,
        edges: Tensor,
        values: Tensor | None = None,
        own_value: Tensor | None = None,
        edge_attr: Tensor | None = None,
    ):
        """Posterior ``(mu, logstd)`` of z for each family item (node ``node[j]`` in state ``state[j]``).

        ``edges`` are built by :func:`family_edges` (value nodes -> items).
        The same layer and the same inputs as :meth:`encode` on a row: item
        ``j`` hears its parents' value embeddings and knows its own.
        """
        values = self.values() if values is None else values
        # an embedding lookup, not advanced indexing: its backward sums in a fixed order (see decode)
        own = torch.nn.functional.embedding(self.offsets[node] + state if own_value is None else own_value, values)
        h = self.encoder((values, own), edges, edge_attr=edge_attr)  # bipartite: value nodes -> items
        mu, logstd = h.split([self.z_dim, self.z_dim], dim=-1)
        return mu, logstd.clamp(_LOGSTD_MIN, _LOGSTD_MAX)

    def decode_families(
        self,
        node: Tensor,
        z: Tensor,
        edges: Tensor,
        u: Tensor | None = None,
        values: Tensor | None = None,
        edge_attr: Tensor | None = None,
    ) -> Tensor:
        """Logits ``[D, K_max]`` of p(x | parents, z[, u]) for each family item; padded states are ``-inf``.

        ``u [D]`` is the state of the node's component latent (-1: none, as
        for an intervened member). Item ``j`` computes exactly what
        :meth:`decode` computes for node ``node[j]`` of a row with the same
        parent values, z and latent state.
        """
        values = self.values() if values is None else values
        dst = self.mech_emb(self.mechanism[node]) + self.z_proj(z)
        if self.num_groups and u is not None:
            g = self.node_group[node]
            hears = (g >= 0) & (u >= 0)
            flat = self.u_emb.reshape(self.num_groups * self.u_states, -1)
            contrib = torch.nn.functional.embedding(g.clamp_min(0) * self.u_states + u.clamp_min(0), flat)
            dst = dst + contrib * hears.unsqueeze(-1).to(dst.dtype)
        h = self.decoder((values, dst), edges, edge_attr=edge_attr)  # bipartite: value nodes -> items
        index = self.state_index[node]
        if self.replicas > 1:  # [D, R, K]: each replica's hidden slice against its own output embeddings
            r = self.replicas
            w = self.out_emb.weight.view(-1, r, self.rep_hidden)
            every = torch.einsum("drh,trh->drt", h.view(h.size(0), r, self.rep_hidden), w)
            every = every + self.out_bias.weight.t().unsqueeze(0)
            logits = every.gather(2, index.unsqueeze(1).expand(-1, r, -1))
            return logits.masked_fill(~self.valid[node].unsqueeze(1), float("-inf"))
        logits = (h @ self.out_emb.weight.t() + self.out_bias.weight.t()).gather(1, index)
        return logits.masked_fill(~self.valid[node], float("-inf"))

    def family_terms(
        self, batch: FamilyBatch, generator: torch.Generator | None = None, prior_mean: bool = False
    ) -> tuple[Tensor, Tensor, Tensor]:
        """Per-item log-likelihoods and per-cell KL for a :class:`FamilyBatch`.

        Returns ``(logp [D], kl [C], mu)``: the log-probability of each
        decoder item's own state and the KL of each cell's q(z) from the
        prior. z is sampled (reparameterised, from ``generator`` when given)
        in training mode, the mean in eval mode, as in :meth:`encode`; with
        ``prior_mean`` it is the prior's mean, zero, so that the
        log-likelihoods are the decoder's predictions from the parents alone.
        """
        values = self.values()
        mu, logstd = self.encode_families(
            batch.node, batch.state, batch.enc_edges, values, batch.own_value, batch.enc_attr
        )
        if prior_mean:
            z = torch.zeros_like(mu)
        elif self.training:
            if self.replicas > 1:  # each replica's noise from its own generator, as if trained alone
                gens = generator if isinstance(generator, (list, tuple)) else [generator] * self.replicas
                noise = torch.cat([
                    torch.randn((mu.size(0), self.rep_z), generator=g, device=mu.device, dtype=mu.dtype) for g in gens
                ], dim=1)
            else:
                noise = torch.randn(mu.shape, generator=generator, device=mu.device, dtype=mu.dtype)
            z = mu + noise * logstd.exp()
        else:
            z = mu
        cell = batch.dec_cell
        # a member cell is decoded once per latent state; with no member, items are the cells in order
        z_items = z if batch.all_free else torch.nn.functional.embedding(cell, z)
        dec_node = batch.node[cell] if batch.dec_node is None else batch.dec_node
        logits = self.decode_families(dec_node, z_items, batch.dec_edges, batch.dec_u, values, batch.dec_attr)
        own = (batch.state[cell] if batch.dec_state is None else batch.dec_state).unsqueeze(-1)
        if self.replicas > 1:  # logp [D, R], kl [C, R]
            logp = torch.log_softmax(logits, dim=-1).gather(2, own.unsqueeze(1).expand(-1, self.replicas, 1)).squeeze(-1)
            kl = _kl(mu.view(mu.size(0), self.replicas, -1), logstd.view(mu.size(0), self.replicas, -1))
            return logp, kl, mu
        logp = torch.log_softmax(logits, dim=-1).gather(1, own).squeeze(-1)
        return logp, _kl(mu, logstd), mu


def family_elbo(
    model: InterventionalVGAE,
    batch: FamilyBatch,
    weight: Tensor,
    group_weight: Sequence[Tensor] = (),
    generator: torch.Generator | None = None,
    prior_mean: bool = False,
) -> Tensor:
    r"""The intervention-aware ELBO summed over rows, from their cells (a scalar).

    .. math::
        \sum_c n_c \big(\log p(x_c \mid \mathrm{pa}_c, z_c) - \mathrm{KL}_c\big)
        + \sum_{\text{member cells}} -n_c \mathrm{KL}_c
        + \sum_g \sum_r n_{gr} \log \sum_k \pi_{gk} \prod_{i \in g, \text{not set}} p(x_i \mid \cdot, u_g = k)

    ``weight [C]`` holds the cells' row counts, ``group_weight`` per
    component the counts of its configurations; ``generator`` draws the
    reparameterisation noise in training mode (for a model of stacked
    replicas, see :mod:`~intervgnn.models.replicas`: ``weight`` is ``[R, C]``,
    ``generator`` one per replica, and the result one ELBO per replica,
    ``[R]``). With ``prior_mean`` z is set
    to zero and the KL left out: the log-likelihood of the rows under the
    decoder's predictions from the parents (and latents) alone, which no
    encoding of a row's own value into z can inflate. On the same rows this equals
    the sum of :func:`elbo_terms` over the rows (in eval mode exactly, up to
    float rounding; in training mode in expectation over the noise).
    """
    logp, kl, _ = model.family_terms(batch, generator, prior_mean)
    if model.replicas > 1:  # weight [R, C]: one ELBO per replica, ``[R]``
        if batch.group_cell:
            raise ValueError("replicated models have no confounded groups")
        total = logp.new_zeros(model.replicas) if prior_mean else (weight * (-kl.t())).sum(1)
        if batch.all_free:  # cells and decoder items coincide
            return total + (weight * logp.t()).sum(1)
        return total + (weight[:, batch.free_cells] * logp[_free_items(batch)].t()).sum(1)
    total = logp.new_zeros(()) if prior_mean else (weight * (-kl)).sum()
    if batch.all_free:
        total = total + (weight * logp).sum()
    else:
        total = total + (weight[batch.free_cells] * logp[_free_items(batch)]).sum()
    if batch.group_cell and batch.node.numel():  # with no cell at all every member was set: no group term
        logprior = torch.log_softmax(model.u_prior, dim=-1)
        s = model.u_states
        per_cell = logp.new_zeros(batch.node.size(0), s)
        members = batch.member_item[:, 0] >= 0
        per_cell[members] = logp[batch.member_item[members]]
        for cells, gid, w in zip(batch.group_cell, batch.group_id, group_weight):
            took = (cells >= 0).to(per_cell.dtype).unsqueeze(-1)
            lookup = torch.nn.functional.embedding(cells.clamp_min(0), per_cell)  # [R, members, S]
            joint = (lookup * took).sum(1) + logprior[gid]
            total = total + (w * torch.logsumexp(joint, dim=-1)).sum()
    return total


def _free_items(batch: FamilyBatch) -> Tensor:
    return batch.free_item[batch.free_cells] if batch.free_items is None else batch.free_items


def _kl(mu: Tensor, logstd: Tensor) -> Tensor:
    return 0.5 * (mu.square() + (2 * logstd).exp() - 1.0 - 2 * logstd).sum(-1)


def elbo_terms(
    logits: Tensor, codes: Tensor, latents: Latents, intervened: Tensor | None, regime_aware: bool = True
) -> tuple[Tensor, Tensor, Tensor]:
    r"""Per-row ELBO and its two parts, each ``[B]``.

    .. math::
        \mathrm{ELBO} = \sum_{i \notin I} \mathbb{E}_q \log p(x_i \mid x_{\mathrm{pa}(i)}, z_i, u_{g(i)})
        - \sum_{i \notin I} \mathrm{KL}\big(q(z_i \mid \cdot) \,\|\, \mathcal{N}(0, I)\big)
        - \sum_{g} \mathrm{KL}\big(q(u_g \mid \cdot) \,\|\, \pi_g\big)

    Intervened nodes (``intervened[b, i]``) are set, not generated: they
    contribute neither likelihood nor KL, and a group whose members are all
    intervened keeps its prior (no KL). With ``regime_aware=False`` every
    node counts (the regime-blind ablation). The likelihood is computed on
    logits (log-softmax), never on probabilities. With groups (``logits``
    of shape ``[B, S, N, K]``) q(u_g) is the exact posterior over the S
    states, so the u-part equals the exact log-marginal of the group.

    Returns
    -------
    (elbo, log_likelihood, kl)
    """
    logsm = torch.log_softmax(logits, dim=-1)
    kl_z = _kl(latents.mu, latents.logstd)
    keep = None
    if regime_aware and intervened is not None:
        keep = (~intervened).to(logsm.dtype)
        kl_z = kl_z * keep
    kl_z = kl_z.sum(-1)
    if logits.dim() == 3:
        logp = logsm.gather(-1, codes.unsqueeze(-1)).squeeze(-1)
        if keep is not None:
            logp = logp * keep
        ll = logp.sum(-1)
        return ll - kl_z, ll, kl_z
    b, s = logits.shape[:2]
    idx = codes.unsqueeze(1).expand(b, s, -1).unsqueeze(-1)
    logp = logsm.gather(-1, idx).squeeze(-1)  # [B, S, N]
    if keep is not None:
        logp = logp * keep.unsqueeze(1)
    member = latents.member.to(logp.dtype)  # [G, N]
    free = 1.0 - member.amax(0)  # nodes outside every group hear no latent: any slice will do
    ll_free = (logp[:, 0] * free).sum(-1)
    group_ll = torch.einsum("bsn,gn->bsg", logp, member)  # log p(x_g | u_g = k)
    joint = group_ll + latents.group_logprior.t().unsqueeze(0)  # [B, S, G]
    log_marginal = torch.logsumexp(joint, dim=1)  # [B, G]
    post = torch.softmax(joint, dim=1)
    expected = (post * group_ll).sum(1)
    kl_u = (post * (torch.log_softmax(joint, dim=1) - latents.group_logprior.t().unsqueeze(0))).sum(1)
    ll = ll_free + expected.sum(-1)
    kl = kl_z + kl_u.sum(-1)
    # the same number as ll - kl, in its numerically stable form
    elbo = ll_free + log_marginal.sum(-1) - kl_z
    return elbo, ll, kl
