"""Detector evaluation for rotated, polygon and upright 3D boxes.

Map then reduce: :func:`match_frames` matches each frame into compact
:class:`MatchRecords`; :func:`reduce_records` turns (concatenated) records into an
:class:`Evaluation` (AP, counts, intervals, breakdowns). :func:`evaluate` is both in one call,
:func:`compare` a paired bootstrap comparison of two detectors. Tables are read by
:func:`obbiou.tables.read_table` (also importable from here).

Where things are: ``matching`` (the map step and the match records, by IoU, BEV IoU or
centre distance), ``ap``, ``bootstrap``, ``breakdown`` and ``tp_errors`` (the numbers),
``point_counts`` (lidar points inside truths), ``result`` (:class:`Evaluation`,
:class:`Counts`, the reduce step), ``protocol`` (:func:`evaluate`, the protocol written
out), ``compare``, ``text`` (summaries), ``plots`` (precision-recall curves on a matplotlib
Figure), ``pictures`` (:func:`draw_frame`: one frame's truths and detections by status)
and ``palette``.

Detection metrics do not establish that a vehicle, robot or any other system is safe; defer
to the applicable safety standards, local regulation and qualified engineers.
"""

from obbiou.evaluation.compare import Comparison, compare
from obbiou.evaluation.matching import MatchRecords, Thresholds, match_frames, parse_thresholds
from obbiou.evaluation.pictures import draw_frame
from obbiou.evaluation.protocol import evaluate
from obbiou.evaluation.result import Counts, Evaluation, reduce_records
from obbiou.evaluation.text import causes_text
from obbiou.tables import Table, read_table

__all__ = [
    "Comparison",
    "Counts",
    "Evaluation",
    "MatchRecords",
    "Table",
    "Thresholds",
    "compare",
    "causes_text",
    "draw_frame",
    "evaluate",
    "match_frames",
    "parse_thresholds",
    "read_table",
    "reduce_records",
]
