"""The same jobs on dask collections (optional extra ``whiten[dask]``).

Dask does the scheduling (threads, processes or a ``distributed`` cluster);
whiten supplies what runs per block and how partial results combine:

* fitting a baseline maps every row block to an accumulator state (count,
  mean and scatter, or an R factor) and merges the states pairwise in a
  balanced tree on the workers; only the final p x p state comes back;
* scoring maps :func:`whiten.monitor.score` over the partitions and returns a
  lazy dask DataFrame (see :func:`whiten.parallel.dask.score.score` for the one exception);
* linear fits reduce R factors of ``[X, y]`` blocks in the same tree
  (tall-skinny QR) and finish on the p x p factor.

Point at an existing cluster the usual dask way, before calling whiten::

    from distributed import Client
    client = Client("tcp://scheduler-host:8786")   # every later compute() runs there
    base = whiten.fit_baseline(ddf)                # ddf: a dask DataFrame

Results equal the in-memory results up to rounding (the tests ask 1e-10
relative): the per-block arithmetic is the same code, only the merge tree
differs.

This package is the dask *engine*: the public entry points hand dask input to
it through :mod:`whiten._engines` (it is registered by ``whiten/__init__.py``),
and it uses only the domain packages' shared kernels. Rooms: ``common``
(collections, tree reduction), ``baseline``, ``score``, ``regression``.
"""

from .baseline import fit_baseline
from .common import is_dask_collection, tree_reduce
from .regression import fit_linear
from .score import score

__all__ = ["is_dask_collection", "fit_baseline", "score", "fit_linear", "tree_reduce"]
