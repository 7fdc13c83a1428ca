"""Fixtures shared by several test modules."""

from __future__ import annotations

import os

import pytest
from hypothesis import settings

# CI (CI=true) draws the same hypothesis examples on every run, so that a landing never
# depends on a rare draw; developers' runs keep exploring new ones, and what they find
# becomes a fixed test (common practice, no source).
settings.register_profile("ci", derandomize=True, print_blob=True)
if os.environ.get("CI"):
    settings.load_profile("ci")


@pytest.fixture(scope="session")
def client():
    """One 2-process Dask cluster on loopback for every distributed test, closed at the end."""
    pytest.importorskip("distributed")
    from distributed import Client, LocalCluster

    from obbiou.evaluation import evaluate
    from obbiou.scene import overlapping_pairs

    # Compile the kernels once here (numba caches them on disk) so that the worker processes
    # load them instead of each compiling the same code at the same time.
    box = {"cx": [0.0], "cy": [0.0], "width": [2.0], "height": [1.0], "angle": [0.1]}
    evaluate(
        {"frame": [0], "label": ["a"], **box}, {"frame": [0], "label": ["a"], "score": [1.0], **box}
    )
    overlapping_pairs([[0.0, 0.0, 2.0, 1.0, 0.1], [0.5, 0.0, 2.0, 1.0, 0.2]])
    with (
        LocalCluster(
            n_workers=2,
            threads_per_worker=1,
            processes=True,
            host="127.0.0.1",
            dashboard_address=None,
            env={"NUMBA_NUM_THREADS": "1"},  # one thread per worker process, as obbiou does
        ) as cluster,
        Client(cluster) as cl,
    ):
        yield cl
