"""The error model of a set of closures: which covariance, and the whitening it gives.

Closures of one snapshot that share a baseline are correlated. With A the signs of each closure on
its rows (closures x rows) and sigma_k / |V_k| the relative error of row k (the ``row_sigma`` of
the set), the covariance of the snapshot's closures is C = A diag(sigma_k^2 / |V_k|^2) A^T (linear
propagation; Chael et al. 2018, ApJ 857, 23). "snapshot" whitens each snapshot's residuals by the
inverse of the Cholesky factor of C (snapshots independent); "diagonal" (common practice) keeps
only the diagonal, each closure weighed by its own sigma.
"""

import numpy as np

from ...errors import UvfitError
from ..base import effective_sigma

#: words used in outputs for the error model of a diagonal covariance
COVARIANCE_NOTE = (
    "diagonal approximation: errors by linear propagation; correlations between "
    "closures that share a baseline are ignored"
)

#: the covariances a closure statistic accepts
COVARIANCES = ("diagonal", "snapshot")


def check_covariance(covariance, full):
    """The covariance to use: "snapshot" by default for the non-redundant set, "diagonal" for the
    full set (whose covariance is singular)."""
    if covariance is None:
        return "diagonal" if full else "snapshot"
    if covariance not in COVARIANCES:
        raise UvfitError(
            f"unknown closure covariance '{covariance}'",
            "use 'snapshot' (the default for the non-redundant set) or 'diagonal'",
        )
    if covariance == "snapshot" and full:
        raise UvfitError(
            "the full (redundant) closure set has a singular covariance",
            "use the non-redundant set (not `full`) with the snapshot covariance",
        )
    return covariance


def whitening(vset, cs):
    """Block-diagonal W with W C W^T = 1 (C the covariance of each snapshot's closures) and
    0.5 log det C. The covariance blocks are built in a loop over snapshots (construction
    only); their Cholesky factors and inverses are computed in batches of equal size."""
    from scipy.sparse import block_diag

    rows_of = cs.rows
    if getattr(cs, "entry_rows", None) is not None:
        # averaged sets: shared (interval, baseline) entries correlate closures; the diagonal is
        # each closure's own error (thermal or scatter, see build.build_averaged)
        rows_of = cs.entry_rows
        rel2 = cs.entry_sigma**2
    elif cs.row_sigma is not None:
        rel2 = cs.row_sigma**2
    else:
        amp = np.abs(vset.vis)
        with np.errstate(divide="ignore", invalid="ignore"):
            rel2 = effective_sigma(vset.sigma, amp, cs.systematic) ** 2 / amp**2
    bounds = np.flatnonzero(np.diff(cs.snapshot)) + 1
    groups = np.split(np.arange(cs.n), bounds)
    covs = []
    for idx in groups:
        rows = rows_of[idx]
        uniq, inv = np.unique(rows, return_inverse=True)
        a = np.zeros((len(idx), len(uniq)))
        np.add.at(a, (np.repeat(np.arange(len(idx)), rows.shape[1]), inv.ravel()), cs.signs[idx].ravel())
        cov = (a * rel2[uniq]) @ a.T
        if rows_of is not cs.rows:
            scale = cs.sigma[idx] / np.sqrt(np.diag(cov))
            cov = cov * scale[:, None] * scale[None, :]
        covs.append(cov)
    blocks = [None] * len(groups)
    logdet = 0.0
    sizes = np.array([len(g) for g in groups])
    for k in np.unique(sizes):
        which = np.flatnonzero(sizes == k)
        low = np.linalg.cholesky(np.stack([covs[i] for i in which]))
        white = np.linalg.inv(low)
        logdet += float(np.sum(np.log(np.diagonal(low, axis1=1, axis2=2))))
        for j, i in enumerate(which):
            blocks[i] = white[j]
    return block_diag(blocks, format="csr"), logdet
