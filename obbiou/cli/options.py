"""Pieces every command shares: the parser class, option groups, option value types.

Option values that argparse can check are checked here (one line, exit status 2, as for any
bad option); what only the library can judge is left to it (it raises
:class:`~obbiou.errors.InvalidInput`, which :func:`obbiou.cli.main` reports the same way).
"""

from __future__ import annotations

import argparse
import math
import sys
from collections.abc import Sequence
from typing import Any

from obbiou.errors import InvalidInput
from obbiou.evaluation.ap import KINDS
from obbiou.shapes import SHAPES

__all__ = [
    "BAD_INPUT",
    "Parser",
    "HelpFormatter",
    "bad_option",
    "add_common",
    "add_matching",
    "matching_options",
    "parse_iou",
    "bucket_edges",
    "positive_float",
    "finite_float",
    "positive_int",
    "emit",
]

#: Exit status for bad input (files, options), as argparse uses for bad options.
BAD_INPUT = 2


def bad_option(option: str, message: str) -> InvalidInput:
    """The error for a bad option value; ``message`` is the one line shown."""
    return InvalidInput(option, message, message=message)


class Parser(argparse.ArgumentParser):
    """argparse with one-line errors that point to ``--help``."""

    def error(self, message: str) -> None:  # type: ignore[override]
        self.exit(BAD_INPUT, f"{self.prog}: error: {message} (see {self.prog} --help)\n")


class HelpFormatter(argparse.RawDescriptionHelpFormatter):
    """Keep the examples' line breaks; show a default when there is one worth showing."""

    def _get_help_string(self, action: argparse.Action) -> str:
        text = action.help or ""
        default = action.default
        shown = not (default is None or default is False or default == argparse.SUPPRESS)
        if shown and "default" not in text:
            if action.option_strings:
                text += " (default: %(default)s)"
        return text


# -- value types ------------------------------------------------------------------------------


def _float(text: str) -> float:
    try:
        return float(text)
    except ValueError:
        raise argparse.ArgumentTypeError(f"expected a number, got {text!r}") from None


def positive_float(text: str) -> float:
    """argparse type: a finite number > 0."""
    value = _float(text)
    if not (value > 0 and value < float("inf")):
        raise argparse.ArgumentTypeError(f"expected a positive number, got {text!r}")
    return value


def finite_float(text: str) -> float:
    """argparse type: a finite number."""
    value = _float(text)
    if not abs(value) < float("inf"):
        raise argparse.ArgumentTypeError(f"expected a finite number, got {text!r}")
    return value


def positive_int(text: str) -> int:
    """argparse type: a whole number >= 1."""
    try:
        value = int(text)
    except ValueError:
        raise argparse.ArgumentTypeError(f"expected a whole number >= 1, got {text!r}") from None
    if value < 1:
        raise argparse.ArgumentTypeError(f"expected a whole number >= 1, got {text!r}")
    return value


def parse_iou(values: Sequence[str] | None, option: str = "--iou") -> Any:
    """Turn the ``--iou`` options into the ``iou`` argument of the evaluation.

    Each value is a threshold ``0.5``, a list ``0.5,0.75``, a range ``0.5:0.95:0.05`` or one
    of those for one label, ``LABEL=VALUE``. A value without a label is the default for the
    labels not named.

    Examples
    --------
    >>> parse_iou(["0.5:0.95:0.05"])
    '0.5:0.95:0.05'
    >>> parse_iou(["0.5", "crane=0.7"])
    {None: '0.5', 'crane': '0.7'}
    >>> parse_iou(None)
    0.5
    >>> parse_iou(["0.5,1,2,4"], "--distance")
    '0.5,1,2,4'
    """
    if not values:
        return 0.5
    per_label: dict[str | None, str] = {}
    for text in values:
        label, sep, value = text.rpartition("=")
        key = label.strip() if sep else None
        if sep and not key:
            raise bad_option(
                option, f"{option} {text!r}: expected LABEL=VALUE with a label before '='"
            )
        if key in per_label:
            what = f"label {key!r}" if key else "the default"
            raise bad_option(option, f"{option}: {what} is given twice")
        per_label[key] = value.strip()
    if list(per_label) == [None]:
        return per_label[None]
    return per_label


def bucket_edges(text: str | None, option: str) -> list[float] | None:
    """``"0,32,96"`` -> ``[0.0, 32.0, 96.0]`` (bucket edges).

    Examples
    --------
    >>> bucket_edges("0,10,20", "--range-buckets")
    [0.0, 10.0, 20.0]
    >>> bucket_edges("5,1", "--size-buckets")
    Traceback (most recent call last):
    ...
    obbiou.errors.InvalidInput: --size-buckets '5,1': expected at least two increasing edges
    >>> bucket_edges("0,nan", "--size-buckets")
    Traceback (most recent call last):
    ...
    obbiou.errors.InvalidInput: --size-buckets '0,nan': an edge is NaN (edges are numbers; inf
    is allowed)
    """
    if text is None:
        return None
    try:
        edges = [float(v) for v in text.split(",") if v.strip()]
    except ValueError:
        raise bad_option(
            option, f"{option} {text!r}: expected numbers separated by commas"
        ) from None
    if any(math.isnan(e) for e in edges):
        reason = f"{option} {text!r}: an edge is NaN (edges are numbers; inf is allowed)"
        raise bad_option(option, reason)
    if len(edges) < 2 or any(b <= a for a, b in zip(edges, edges[1:], strict=False)):
        raise bad_option(option, f"{option} {text!r}: expected at least two increasing edges")
    return edges


def emit(table: Any, out: str | None, note: str) -> None:
    """Write ``table`` to ``out`` or, without it (or ``-``), as CSV on stdout; then say what
    was done on stderr."""
    if out is None or out == "-":
        table.to_csv(sys.stdout, index=False)
        print(note, file=sys.stderr)
    else:
        from obbiou.tables import write_table

        write_table(table, out)
        print(f"{note}; wrote {out}", file=sys.stderr)


# -- option groups ----------------------------------------------------------------------------


def add_table_output(p: argparse.ArgumentParser, *, bev: bool = False) -> None:
    """``--out PATH`` of the commands that write a table (and, with ``bev``, ``--bev``)."""
    p.add_argument(
        "--out",
        metavar="PATH",
        default=None,
        help="output table (.csv, .parquet, .jsonl; default: CSV on stdout)",
    )
    if bev:
        p.add_argument(
            "--bev",
            action="store_true",
            help="3D boxes by the IoU of their ground-plane footprints (bird's-eye view)",
        )


def add_common(p: argparse.ArgumentParser, *, shape: bool = True) -> None:
    """``--shape`` and ``--degrees`` (tables of boxes), ``--quiet``."""
    if shape:
        p.add_argument(
            "--shape",
            choices=SHAPES,
            default=None,
            help="box layout of the tables (default: inferred from the columns)",
        )
        p.add_argument(
            "--degrees",
            action="store_true",
            help="angle / yaw columns are in degrees (default: radians)",
        )
    p.add_argument("-q", "--quiet", action="store_true", help="no progress bars")


def add_matching(p: argparse.ArgumentParser) -> None:
    """The options of the evaluation protocol: ``--iou`` or ``--distance``, ``--bev``,
    ``--points``, ``--min-points``, ``--ap``, ``--recall-points``, ``--top``."""
    p.add_argument(
        "--iou",
        action="append",
        metavar="[LABEL=]T",
        help="IoU threshold(s) for a match: 0.5, a list 0.5,0.75, a range "
        "0.5:0.95:0.05; repeat as LABEL=T for a label's own (default: 0.5)",
    )
    p.add_argument(
        "--distance",
        action="append",
        metavar="[LABEL=]D",
        help="match by ground-plane centre distance instead of IoU, at these distances "
        "(metres), e.g. 0.5,1,2,4; repeat as LABEL=D for a label's own",
    )
    p.add_argument(
        "--bev",
        action="store_true",
        help="3D boxes: match by the IoU of their ground-plane footprints (bird's-eye view)",
    )
    p.add_argument(
        "--points",
        metavar="PATH",
        default=None,
        help="lidar points, a table or a folder of tables (columns frame, x, y[, z]): count "
        "the points inside each truth (on the workers with --workers/--scheduler)",
    )
    p.add_argument(
        "--min-points",
        type=positive_int,
        default=None,
        metavar="K",
        help="with --points: truths holding fewer than K points become ignore truths",
    )
    p.add_argument(
        "--ap",
        choices=KINDS,
        default="all-points",
        help="how AP is computed: area under the precision envelope (all-points), "
        "the envelope sampled at 11 or 101 recall levels, or the plain step sum",
    )
    p.add_argument(
        "--recall-points",
        type=int,
        default=None,
        metavar="N",
        help="sample the precision envelope at N recall levels (overrides --ap)",
    )
    p.add_argument(
        "--top",
        type=int,
        default=None,
        metavar="N",
        help="score only the N highest-scored detections of each frame",
    )


def matching_options(args: argparse.Namespace) -> dict[str, Any]:
    """The keyword arguments of :func:`obbiou.evaluation.evaluate` that
    :func:`add_common` and :func:`add_matching` give."""
    if args.iou and args.distance:
        raise bad_option("--distance", "give either --iou or --distance, not both")
    if args.min_points is not None and args.points is None:
        raise bad_option("--min-points", "--min-points needs --points PATH")
    opts: dict[str, Any] = {
        "shape": args.shape,
        "iou": None if args.distance else parse_iou(args.iou),
        "ap": args.ap,
        "degrees": args.degrees,
    }
    if args.distance:
        opts["distance"] = parse_iou(args.distance, "--distance")
    if args.bev:
        opts["bev"] = True
    if args.points is not None:
        opts["points"] = args.points
    if args.min_points is not None:
        opts["min_points"] = args.min_points
    if args.recall_points is not None:
        opts["recall_points"] = args.recall_points
    if args.top is not None:
        opts["max_detections"] = args.top
    return opts
