"""Scale-out on Dask: evaluation and scene overlap for datasets that outgrow one machine.

Two jobs run their map step on a Dask cluster and their reduce step in this process:

* :func:`evaluate_distributed` — detector evaluation. The map step matches detections to
  truths frame by frame on the workers and sends back compact *match records* (a few numbers
  per detection and per truth, no box coordinates); the reduce step (AP, intervals,
  breakdowns) is the same code as in :func:`obbiou.evaluation.evaluate`, so the numbers are
  the same — equal, not approximately equal.
* :func:`overlapping_pairs_distributed` — the overlapping pairs of a scene too large for one
  process, by spatial tiles: each tile receives the boxes whose extents reach into it (the
  halo of boxes that overhang its border), finds the pairs among them, and keeps a pair only
  if the tile holds the pair's reference point, so every pair is found exactly once. The
  result equals :func:`obbiou.overlapping_pairs` on the whole table.

Where the work runs (``client``, ``scheduler``, ``workers``):

* a ``dask.distributed.Client`` you pass in is used as it is and left open;
* ``scheduler="tcp://host:8786"`` connects to an existing cluster for the run;
* ``workers=N`` starts a ``LocalCluster`` of N worker processes on 127.0.0.1 for the run and
  closes it afterwards;
* none of these: the current default client if there is one, else an in-process cluster
  (threads) for the run.

Inputs may be a Dask DataFrame, a folder of Parquet files (a dataset; workers must see the
same path), a single file, a pandas DataFrame, or (for scene overlap) an array of boxes.

Dask is an optional extra: ``pip install 'obbiou[dask]'``. Nothing here imports it until a
function runs.

First use compiles kernels on every worker (seconds per kernel group): give the workers one
shared cache directory (``NUMBA_CACHE_DIR`` on a shared file system, set before they start)
and call :func:`warm_workers` once, or pass ``warm=True`` to a job, to compile up front with
a progress bar rather than inside the first tasks.

Where things are: :mod:`~obbiou.distributed.cluster` (connecting, waiting for tasks),
:mod:`~obbiou.distributed.sources` (inputs as partitions), :mod:`~obbiou.distributed.wire`
(match records in a compact lossless form), :mod:`~obbiou.distributed.evaluate` and
:mod:`~obbiou.distributed.tiles` (the two jobs), :mod:`~obbiou.distributed.warm` (compiling on
the workers up front).
"""

from obbiou.distributed.cluster import connect
from obbiou.distributed.evaluate import evaluate_distributed
from obbiou.distributed.tiles import overlapping_pairs_distributed
from obbiou.distributed.warm import warm_workers
from obbiou.errors import TaskFailed

__all__ = [
    "evaluate_distributed",
    "overlapping_pairs_distributed",
    "warm_workers",
    "connect",
    "TaskFailed",
]
