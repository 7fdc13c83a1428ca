"""Likely mistakes in valid evaluation input give warnings (hand-worked cases, invented rows:
rooftop panels of a drone survey)."""

from __future__ import annotations

import warnings

from obbiou.errors import LikelyMistake
from obbiou.evaluation import evaluate
from tests.cli.test_commands import run

BOX = {"cx": [10.0, 20.0], "cy": [10.0, 10.0], "width": [4.0, 4.0], "height": [2.0, 2.0]}


def tables(truth_frames, det_frames, truth_labels=("panel", "panel"), det_labels=None,
           angles=(0.3, 0.5)):  # fmt: skip
    truth = {"frame": list(truth_frames), "label": list(truth_labels), **BOX,
             "angle": list(angles)}  # fmt: skip
    dets = {"frame": list(det_frames), "label": list(det_labels or truth_labels),
            "score": [0.9, 0.8], **BOX, "angle": list(angles)}  # fmt: skip
    return truth, dets


def messages(truth, dets, **kw) -> list[str]:
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        evaluate(truth, dets, **kw)
    return [str(w.message) for w in caught if issubclass(w.category, LikelyMistake)]


def test_clean_tables_give_no_warning():
    truth, dets = tables([1, 1], [1, 1])
    assert messages(truth, dets) == []


def test_frame_ids_written_differently():
    # integers in the truth, zero-padded text in the detections: one frame by the frame-id
    # rule, but no id is written alike in both tables, so it is said once
    truth, dets = tables([7, 7], ["007", "007"])
    got = messages(truth, dets)
    assert len(got) == 1
    assert "share no frame id as written; 1 frame matches only because integer-valued" in got[0]
    assert "truth 7, detections '007'" in got[0]
    # the same ids written alike in one frame at least: nothing to say (hand-worked)
    truth, dets = tables([7, 8], ["007", "8"])
    assert messages(truth, dets) == []
    # integers against their own text (a CSV cell has no type): nothing to say
    truth, dets = tables([7, 7], ["7", "7"])
    assert messages(truth, dets) == []


def test_no_common_frame_at_all():
    truth, dets = tables(["a", "a"], ["b", "b"])
    got = messages(truth, dets)
    assert got == [
        "truth and detections share no frame id (truth e.g. 'a', detections e.g. 'b'): every "
        "detection is a false positive, every truth a miss"
    ]


def test_labels_that_match_only_up_to_case_or_spaces():
    truth, dets = tables([1, 1], [1, 1], ("Panel", "vent"), ("panel ", "vent"))
    got = messages(truth, dets)
    assert got == [
        "detection label 'panel ' equals truth label 'Panel' only up to letter case or spaces "
        "(labels compare exactly)"
    ]


def test_no_detection_label_is_a_truth_label():
    truth, dets = tables([1, 1], [1, 1], ("panel", "panel"), ("car", "car"))
    got = messages(truth, dets)
    assert got == [
        "no detection label is a truth label (detections: 'car', truth: 'panel'): every "
        "detection is a false positive"
    ]


def test_angles_that_look_like_degrees():
    truth, dets = tables([1, 1], [1, 1], angles=(30.0, 45.0))
    got = messages(truth, dets)
    assert len(got) == 2 and all("look like degrees" in m for m in got)
    assert got[0].startswith("truth: 2 of 2 angle values lie beyond 2*pi (up to 45)")
    assert messages(truth, dets, degrees=True) == []  # converted: nothing to say
    # a few large angles among radians (one in ten or fewer: rule of thumb) say nothing
    truth, dets = tables([1, 1], [1, 1], angles=(0.3, 0.5))
    assert messages(truth, dets) == []


def test_the_command_line_prints_each_warning_as_one_line(tmp_path):
    truth, dets = tables([1, 1], [1, 1], ("Panel", "Panel"), ("panel", "panel"), (30.0, 45.0))
    import pandas as pd

    pd.DataFrame(truth).to_csv(tmp_path / "t.csv", index=False)
    pd.DataFrame(dets).to_csv(tmp_path / "d.csv", index=False)
    done = run("evaluate", str(tmp_path / "t.csv"), str(tmp_path / "d.csv"), "-q")
    assert done.returncode == 0, done.stderr
    lines = [x for x in done.stderr.splitlines() if "warning:" in x]
    assert len(lines) == 4 and all(x.startswith("obbiou evaluate: warning: ") for x in lines)
    assert "Traceback" not in done.stderr and "warnings.warn" not in done.stderr


def test_the_warned_case_evaluates_by_the_frame_id_rule():
    # the warning changes no result: by the frame-id rule 7 and "007" are one frame, so
    # both identical detections match their truths (hand-worked: AP 1)
    truth, dets = tables([7, 7], ["007", "007"])
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", LikelyMistake)
        ev = evaluate(truth, dets)
    assert ev.ap("panel", 0.5) == 1.0
    assert ev.counts("panel", 0.5)[:4] == (2, 0, 0, 0)
