"""Several VGAEs of one shape trained as one: block-diagonal layers, one full-batch pass for all of them.

The cross-fitted models of the neural estimator have the same graph and
sizes and see the same counted configurations, only with other weights
(the rows outside their fold). Trained one after the other, each step of
each model pays eager PyTorch's fixed cost per operation, which on a few
hundred configurations is most of the time. Here R models become one
:class:`~intervgnn.models.vgae.InterventionalVGAE` whose every feature axis
holds the R models side by side: embeddings are concatenated along
features, and every linear layer is block-diagonal (replica r's outputs
read only replica r's inputs), with the blocks off the diagonal zero and
their gradients masked to zero after each backward pass. Through the same
interventional layers the stacked model computes exactly what the R models
compute, in one pass; :func:`unstack_models` copies the trained blocks back
into the R models.

Feature layout: a feature axis made of segments (e.g. the encoder's
message input is [parent value, own value], its output [mu, logstd])
holds, per segment, the R replicas' slices one after another.
"""

from __future__ import annotations

from collections.abc import Sequence

import torch

from .vgae import InterventionalVGAE

__all__ = ["stack_models", "unstack_models", "mask_replica_grads"]


def _index(segments: Sequence[int], replicas: int, r: int) -> torch.Tensor:
    """Positions of replica ``r``'s features on an axis of per-replica ``segments`` (sizes)."""
    parts, start = [], 0
    for size in segments:
        parts.append(torch.arange(start + r * size, start + (r + 1) * size))
        start += replicas * size
    return torch.cat(parts)


def _layouts(model: InterventionalVGAE) -> dict[str, tuple[list[int] | None, list[int]]]:
    """Per parameter name of a single model: (input segments or None, output / feature segments)."""
    dim, hid, eh, z = model.dim, model.hidden, model.encoder_hidden, model.z_dim
    out = {
        "state_emb.weight": (None, [dim]),
        "mech_emb.weight": (None, [dim]),
        "out_emb.weight": (None, [hid]),
        "out_bias.weight": (None, [1]),
        "z_proj.weight": ([z], [dim]),
        "z_proj.bias": (None, [dim]),
    }

    def mlps(prefix: str, msg_in: list[int], dst: int, width: int, last: list[int]) -> None:
        n = model.num_layers
        for k in range(n):  # message MLP: [source, target] -> width -> ... -> width
            ins = msg_in if k == 0 else [width]
            out[f"{prefix}.message_mlp.lins.{k}.weight"] = (ins, [width])
            out[f"{prefix}.message_mlp.lins.{k}.bias"] = (None, [width])
        for k in range(n):  # update MLP: [target, aggregated message] -> width -> ... -> last
            ins = [dst, width] if k == 0 else [width]
            outs = last if k == n - 1 else [width]
            out[f"{prefix}.update_mlp.lins.{k}.weight"] = (ins, outs)
            out[f"{prefix}.update_mlp.lins.{k}.bias"] = (None, outs)

    mlps("encoder", [dim, dim], dim, eh, [z, z])  # output [mu, logstd]
    mlps("decoder", [dim, dim], dim, hid, [hid])
    return out


def stack_models(models: Sequence[InterventionalVGAE]) -> InterventionalVGAE:
    """One model computing all of ``models`` side by side (same graph and sizes).

    The result has ``replicas = len(models)``; its blocks hold copies of the
    models' parameters and every other weight is zero. It has no confounded
    groups: the models' group latents (if any) are left out, for cells
    outside every confounded component, which never reach them.
    """
    first = models[0]
    r = len(models)
    with torch.random.fork_rng(devices=[]):  # its own initial weights are overwritten: leave the caller's generator
        big = InterventionalVGAE(
            first.cards, first.edge_index.cpu(), mechanisms=first.mechanism.tolist(), dim=r * first.dim,
            hidden=r * first.hidden, z_dim=r * first.z_dim, num_layers=first.num_layers,
            encoder_hidden=r * first.encoder_hidden, u_states=first.u_states,
        ).to(device=first.state_emb.weight.device, dtype=first.state_emb.weight.dtype)
        big.out_bias = torch.nn.Embedding(first.out_bias.num_embeddings, r).to(  # one per replica
            device=first.out_bias.weight.device, dtype=first.out_bias.weight.dtype
        )
    big.set_replicas(r, first.dim, first.hidden, first.z_dim, first.encoder_hidden)
    layouts = _layouts(first)
    params = dict(big.named_parameters())
    masks = []
    with torch.no_grad():
        for name, p in params.items():
            p.zero_()
        for i, m in enumerate(models):
            for name, q in m.named_parameters():
                if name not in layouts:  # a group latent's prior or embedding
                    continue
                ins, outs = layouts[name]
                rows = _index(outs, r, i)
                target = params[name]
                if ins is None:  # a vector or an embedding: features on the last axis
                    target[..., rows] = q
                else:
                    cols = _index(ins, r, i)
                    target[rows.unsqueeze(1), cols.unsqueeze(0)] = q
        for name, p in params.items():
            ins, outs = layouts[name]
            if ins is not None:
                mask = torch.zeros_like(p, dtype=torch.bool)
                for i in range(r):
                    mask[_index(outs, r, i).unsqueeze(1), _index(ins, r, i).unsqueeze(0)] = True
                masks.append((p, mask.to(p.dtype)))
    big._replica_masks = masks
    return big


def mask_replica_grads(model: InterventionalVGAE) -> None:
    """Zero the gradients of the off-diagonal blocks (call after ``backward``, before the optimiser step)."""
    pairs = [(p.grad, mask.to(device=p.grad.device, dtype=p.grad.dtype))  # no copy where they already agree
             for p, mask in getattr(model, "_replica_masks", ()) if p.grad is not None]
    if pairs:
        grads, masks = zip(*pairs)
        torch._foreach_mul_(list(grads), list(masks))  # one call for all parameters


@torch.no_grad()
def unstack_models(big: InterventionalVGAE, models: Sequence[InterventionalVGAE]) -> None:
    """Copy each replica's block of ``big`` back into ``models`` (in place)."""
    r = len(models)
    layouts = _layouts(models[0])
    params = dict(big.named_parameters())
    for i, m in enumerate(models):
        for name, q in m.named_parameters():
            if name not in layouts:
                continue
            ins, outs = layouts[name]
            rows = _index(outs, r, i)
            source = params[name]
            if ins is None:
                q.copy_(source[..., rows])
            else:
                q.copy_(source[rows.unsqueeze(1), _index(ins, r, i).unsqueeze(0)])
