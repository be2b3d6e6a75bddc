r"""Counts shrunk towards the decoder: posterior-mean CPTs under a neural Dirichlet prior.

For a node with parent configuration :math:`c`, counts :math:`n_c` (a vector
over the node's :math:`k` states, total :math:`N_c`) and the decoder's
conditional :math:`m_c` as base measure, the CPT row under the prior
:math:`\theta_c \sim \mathrm{Dirichlet}(s\, m_c + \alpha \mathbf{1})` has
posterior mean

.. math::
    \hat\theta_c = \frac{n_c + s\, m_c + \alpha}{N_c + s + k\alpha}.

:math:`s = 0` is the additive smoothing of the plug-in estimator; a large
:math:`s` trusts the decoder, which shares strength across parent
configurations; for any fixed :math:`s` the rows approach the maximum-
likelihood CPTs as the counts grow. Which :math:`(s, \alpha)` a node gets is
decided by the rows themselves, per node, with no tuning to any network:

* each candidate is scored by its *cross-fitted* leave-one-out
  log-likelihood: the rows are split into folds, and a row of fold
  :math:`f` is predicted from the counts of every other row and from a
  decoder trained without fold :math:`f`, so a decoder is never credited
  for rows it has seen;
* the candidates are averaged with weights proportional to prior times
  :math:`\exp(\text{score})` (Bayesian model averaging over the
  hyperparameters). The counts-only hypothesis (:math:`s = 0` with the
  plug-in's leave-one-out :math:`\alpha`) holds ``prior_counts`` of the
  prior; the neural hypotheses (:data:`STRENGTHS` x the plug-in's
  :data:`~intervgnn.estimators.plugin.AUTO_ALPHAS`) share the rest. The
  decoder has to earn its weight on held-out rows: where it does not help,
  the answer is the plug-in's.
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass

import numpy as np

__all__ = ["STRENGTHS", "ALPHAS", "Mixture", "mixture_weights", "mixture_rows"]

#: strengths s of the neural prior that are weighed against the counts
STRENGTHS = (0.3, 1.0, 3.0, 10.0, 30.0, 100.0, 300.0, 1000.0)
#: additive smoothing values (the plug-in estimator's ``alpha="auto"`` grid)
ALPHAS = (0.01, 0.03, 0.1, 0.3, 1.0, 3.0)


@dataclass(frozen=True)
class Mixture:
    """Posterior weights over (strength, alpha) candidates for one node.

    ``strength[j] == 0`` is the counts-only candidate. ``weight`` sums to one.
    """

    strength: np.ndarray
    alpha: np.ndarray
    weight: np.ndarray

    @property
    def neural_share(self) -> float:
        """Posterior weight of the hypotheses that use the decoder (strength above 0)."""
        return float(self.weight[self.strength > 0].sum())

    def dirichlet_params(self, counts: np.ndarray, base: np.ndarray, pick: np.ndarray) -> np.ndarray:
        """``[n, *counts.shape]``: the rows' Dirichlet parameters counts + s base + alpha under candidates ``pick`` [n].

        ``base`` is the shape of ``counts`` (one decoder for every draw) or
        ``[n, *counts.shape]`` (a decoder per draw).
        """
        tail = (1,) * np.ndim(counts)
        base = np.asarray(base)
        if base.ndim == np.ndim(counts):
            base = base[None]
        return (np.asarray(counts)[None] + self.strength[pick].reshape(-1, *tail) * base
                + self.alpha[pick].reshape(-1, *tail))



def mixture_weights(
    counts: np.ndarray,
    fold_counts: Sequence[np.ndarray],
    fold_bases: Sequence[np.ndarray],
    prior_counts: float = 0.8,
    strengths: Sequence[float] = STRENGTHS,
    alphas: Sequence[float] = ALPHAS,
) -> Mixture:
    """Weigh the counts-only and the neural-prior candidates of one node by cross-fitted likelihood.

    Parameters
    ----------
    counts : numpy.ndarray
        ``[R, k]`` counts of all rows (R parent configurations, dense or the observed ones).
    fold_counts : sequence of numpy.ndarray
        ``[R, k]`` counts of the rows of each fold (they sum to ``counts``).
    fold_bases : sequence of numpy.ndarray
        ``[R, k]`` per fold, the decoder's conditionals from a model trained
        *without* that fold.
    prior_counts : float
        Prior weight of the counts-only hypothesis (in (0, 1]).
    strengths, alphas : grids of candidate strengths and smoothing values.

    Returns
    -------
    Mixture
    """
    counts = np.asarray(counts, dtype=np.float64)
    k = counts.shape[1]
    total = counts.sum(axis=1, keepdims=True)
    if not total.any():
        # no row ever generated this variable (e.g. it was set in every row): nothing to weigh, and
        # the decoder never saw its mechanism either; the counts-only answer is uniform
        prior_counts = 1.0
    # counts-only: the plug-in's leave-one-out choice of alpha
    pos = counts > 0
    n_pos, t_pos = counts[pos], np.broadcast_to(total, counts.shape)[pos]
    a_col = np.asarray(alphas, dtype=np.float64).reshape(-1, 1)
    loo = (n_pos * np.log(np.maximum((n_pos - 1 + a_col) / np.maximum(t_pos - 1 + k * a_col, 1e-300), 1e-300))).sum(1)
    best = int(np.argmax(loo))
    strength, alpha, logw = [0.0], [alphas[best]], [np.log(prior_counts) + loo[best]]
    if prior_counts < 1.0 and fold_bases:
        share = np.log((1.0 - prior_counts) / (len(strengths) * len(alphas)))
        s_grid, a_grid = np.meshgrid(np.asarray(strengths, float), np.asarray(alphas, float), indexing="ij")
        s_col, a_col = s_grid.reshape(-1, 1), a_grid.reshape(-1, 1)  # [J, 1]
        score = np.zeros(s_col.shape[0])
        for nf, mf in zip(fold_counts, fold_bases):
            cell = np.nonzero(nf > 0)  # only the held-out rows' cells enter the likelihood
            num = counts[cell] - 1 + s_col * mf[cell] + a_col  # [J, cells]
            den = total[cell[0], 0] - 1 + s_col + k * a_col
            score += (nf[cell] * np.log(np.maximum(num / np.maximum(den, 1e-300), 1e-300))).sum(axis=1)
        strength += s_col[:, 0].tolist()
        alpha += a_col[:, 0].tolist()
        logw += (share + score).tolist()
    logw = np.asarray(logw)
    w = np.exp(logw - logw.max())
    return Mixture(np.asarray(strength), np.asarray(alpha), w / w.sum())


def mixture_rows(counts: np.ndarray, base: np.ndarray, mixture: Mixture) -> np.ndarray:
    """CPT rows ``[R, k]``: the posterior means of the candidates, averaged with the mixture's weights.

    ``counts`` and ``base`` are ``[R, k]`` (``base`` may be anything where
    only counts-only candidates carry weight). Works on any leading shape.

    Examples
    --------
    Counts 3 and 1; half the weight on Laplace smoothing (4/6 = 0.6667), half
    on a strength-10 prior centred on (0.5, 0.5) (9/16 = 0.5625):

    >>> mix = Mixture(np.array([0.0, 10.0]), np.array([1.0, 1.0]), np.array([0.5, 0.5]))
    >>> mixture_rows(np.array([[3.0, 1.0]]), np.array([[0.5, 0.5]]), mix).round(4).tolist()
    [[0.6146, 0.3854]]
    """
    counts = np.asarray(counts, dtype=np.float64)
    base = np.asarray(base, dtype=np.float64)
    k = counts.shape[-1]
    total = counts.sum(axis=-1, keepdims=True)
    # sum_j w_j (n + s_j b + a_j) / (N + s_j + k a_j) = n A + b B + C, with per-row weights
    # c_j = w_j / (N + s_j + k a_j): A = sum c_j, B = sum c_j s_j, C = sum c_j a_j
    keep = mixture.weight > 0
    s, a, w = (np.asarray(x, dtype=np.float64)[keep].reshape(-1, 1) for x in (mixture.strength, mixture.alpha, mixture.weight))
    c = w / (total.reshape(1, -1) + s + k * a)  # [J, rows]
    shape = total.shape
    out = counts * c.sum(0).reshape(shape) + base * (c * s).sum(0).reshape(shape) + (c * a).sum(0).reshape(shape)
    return out / out.sum(axis=-1, keepdims=True)
