"""Fits over several files at once: the statistic is that of the stacked rows
(:func:`uvfit.data.stack.stack_sets`), so it is the sum of the files' statistics; this module
breaks the chi2 down per file."""

from __future__ import annotations

import numpy as np

from ..data.stack import file_of_rows


def per_file_chi2(statistic, theta, labels) -> list[dict]:
    """[{"data", "rows", "chi2", "n"}] per stacked file: the squared whitened residuals of the
    data on its rows (``statistic.row_index``; a datum on several rows goes to its first row's
    file, which holds them all, as the files' channels differ)."""
    vs = statistic.vset
    files = file_of_rows(vs)
    r2 = np.asarray(statistic.residuals(theta), float) ** 2
    index = getattr(statistic, "row_index", None)
    if index is None:
        index = np.arange(vs.n) if len(r2) == vs.n else np.concatenate([np.arange(vs.n), np.arange(vs.n)])
    index = np.asarray(index, int)
    first = index if index.ndim == 1 else index[:, 0]
    owner = np.where(first >= 0, files[np.clip(first, 0, None)], -1)
    out = []
    for k, label in enumerate(labels):
        mine = owner == k
        out.append(
            {"data": label, "rows": int(np.sum(files == k)), "chi2": float(np.sum(r2[mine])), "n": int(np.sum(mine))}
        )
    return out
