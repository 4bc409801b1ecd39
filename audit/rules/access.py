"""Access runs: chains of pipes between access points, for the spacing rule.

Spacing is measured between access points (manholes a person can open). A node without access
(a buried junction, a bend, a blind connection) does not end a run, so the pipes that meet at it
belong to one run. Runs are the connected components of a graph whose vertices are the pipes and
the non-access nodes, with an edge from each pipe to each non-access node at its ends; a pipe
whose end node is unknown (-1) ends its run there.
"""

from __future__ import annotations

import numpy as np
from scipy.sparse import coo_array
from scipy.sparse.csgraph import connected_components


def access_runs(
    *,
    upstream: np.ndarray,
    downstream: np.ndarray,
    node_access: np.ndarray,
) -> np.ndarray:
    """Label of the access run each pipe belongs to.

    Parameters
    ----------
    upstream, downstream : node index at each end of each pipe; -1 where unknown
    node_access : True for each node that is an access point

    Returns
    -------
    integer run label per pipe, 0 .. number of runs - 1

    Examples
    --------
    Three pipes through two buried nodes (1, 2) form one run; a manhole (3) ends it:

    >>> access_runs(upstream=np.array([0, 1, 2, 3]), downstream=np.array([1, 2, 3, 4]),
    ...             node_access=np.array([True, False, False, True, True])).tolist()
    [0, 0, 0, 1]
    """
    pipe_count = len(upstream)
    ends = np.concatenate([upstream, downstream]).astype(np.int64)
    pipes = np.tile(np.arange(pipe_count, dtype=np.int64), 2)
    known = (ends >= 0) & (ends < len(node_access))
    buried = known.copy()
    buried[known] = ~np.asarray(node_access, dtype=bool)[ends[known]]
    size = pipe_count + len(node_access)
    links = coo_array(
        (np.ones(int(buried.sum()), dtype=np.int8), (pipes[buried], pipe_count + ends[buried])),
        shape=(size, size),
    )
    _, labels = connected_components(links, directed=False)
    _, run = np.unique(labels[:pipe_count], return_inverse=True)
    return run.astype(np.int64)


def run_totals(run: np.ndarray, *, length: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Length of pipe [m] and number of pipes in each pipe's run, per pipe.

    Unknown lengths count as zero, so the total is a lower bound where some are missing; it is
    NaN for a run with no known length at all.
    """
    known = np.isfinite(length)
    total = np.bincount(run, weights=np.where(known, length, 0.0)).astype(float)
    total[np.bincount(run, weights=known) == 0] = np.nan
    return total[run], np.bincount(run)[run]
