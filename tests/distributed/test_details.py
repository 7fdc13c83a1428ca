"""Per-row results of a distributed evaluation equal the in-process ones: the records name
each row's place in the whole input however the tables were cut into partitions."""

from __future__ import annotations

import pytest

pytest.importorskip("distributed")
pd = pytest.importorskip("pandas")
dd = pytest.importorskip("dask.dataframe")
import obbiou.evaluation as evaluation  # noqa: E402  (fails, not skips, if it breaks)
from obbiou.distributed import evaluate_distributed  # noqa: E402
from tests.distributed.test_evaluate import synthetic_tables  # noqa: E402

pytestmark = pytest.mark.filterwarnings("ignore:Port .* is already in use")


def test_rows_from_dask_partitions_and_from_tables_read_here(client):
    truth, dets = synthetic_tables(120, seed=5)
    options = dict(iou=[0.5, 0.7], max_detections=10)
    want = evaluation.evaluate(truth, dets, **options)
    got = evaluate_distributed(
        dd.from_pandas(truth, npartitions=3),
        dd.from_pandas(dets, npartitions=4),
        client=client,
        buckets=3,
        **options,
    )
    assert got.inputs is None  # read on the workers: no extra columns here
    for iou in (None, 0.7):
        pd.testing.assert_frame_equal(
            got.detections(iou), want.detections(iou).drop(columns=["note"])
        )
        pd.testing.assert_frame_equal(got.truths(iou), want.truths(iou))
    # in-memory tables are read here and kept: the extra column comes along
    here = evaluate_distributed(truth, dets, client=client, buckets=2, **options)
    pd.testing.assert_frame_equal(here.detections(), want.detections())
    pd.testing.assert_frame_equal(here.confusion(), want.confusion())
    assert (want.detections()["outcome"] == "tp").sum() > 50  # the comparison bites
