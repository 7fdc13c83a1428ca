"""``main()``: the ``obbiou`` parser assembled from the command modules, and error reporting.

Bad input (:class:`~obbiou.errors.InvalidInput`, unreadable files, a missing optional
dependency) is one line on stderr and exit status 2; a failed cluster task
(:class:`~obbiou.errors.TaskFailed`) one line and exit status 1. Anything else is a bug in
obbiou and surfaces as a traceback.

Examples
--------
>>> main(["--version"])
obbiou 0.1.0
0
"""

from __future__ import annotations

import argparse
import sys
import textwrap
import warnings
from collections.abc import Sequence

from obbiou.cli import compare, demo, evaluate, overlap, stitch, suppress, warmup
from obbiou.cli.options import BAD_INPUT, HelpFormatter, Parser
from obbiou.errors import InvalidInput, LikelyMistake, TaskFailed

__all__ = ["main", "build_parser", "COMMANDS"]

#: The commands in the order ``--help`` lists them: name -> module with SUMMARY, EXAMPLE,
#: configure(parser) and run(args).
COMMANDS = {
    "demo": demo,
    "evaluate": evaluate,
    "compare": compare,
    "suppress": suppress,
    "overlap": overlap,
    "stitch": stitch,
    "warmup": warmup,
}

#: Optional dependencies and the extra that installs each.
_EXTRAS = {
    "pandas": "eval",
    "pyarrow": "eval",
    "matplotlib": "eval",
    "tqdm": "eval",
    "dask": "dask",
    "distributed": "dask",
}

_DESCRIPTION = """\
Exact, fast overlap of rotated 2D boxes, convex quadrilaterals and upright 3D boxes, with
non-maximum suppression and detector evaluation, on a CPU.

Tables are CSV, Parquet or JSON Lines with one row per box: frame, label, score (detections)
and the box columns of one layout (angles in radians, counter-clockwise from +x):
  axis      x_min y_min x_max y_max
  rotated   cx cy width height angle
  polygon   px0 py0 px1 py1 px2 py2 px3 py3
  upright   cx cy cz length width height yaw
Ground truth may have a boolean ignore column.
"""

_EPILOG = """\
start here:
  obbiou demo --out demo-output     # an end-to-end run on invented data
  obbiou COMMAND --help             # every command, with an example
"""


def build_parser() -> argparse.ArgumentParser:
    """The argument parser of the ``obbiou`` command (all subcommands)."""
    from obbiou import __version__

    parser = Parser(
        prog="obbiou",
        description=_DESCRIPTION,
        epilog=_EPILOG,
        formatter_class=argparse.RawDescriptionHelpFormatter,
    )
    parser.add_argument("--version", action="version", version=f"obbiou {__version__}")
    sub = parser.add_subparsers(dest="command", metavar="COMMAND", parser_class=Parser)
    for name, module in COMMANDS.items():
        p = sub.add_parser(
            name,
            help=module.SUMMARY,
            description=textwrap.fill(module.SUMMARY, 88),
            epilog="example:\n" + module.EXAMPLE,
            formatter_class=HelpFormatter,
        )
        module.configure(p)
        p.set_defaults(run=module.run)
    return parser


def _one_line(exc: BaseException) -> str:
    text = str(exc) or type(exc).__name__
    return " ".join(text.split())


def _one_line_warning(prog: str):
    """A ``warnings.showwarning`` that prints obbiou's own warnings as one line on stderr."""
    default = warnings.showwarning

    def show(message, category, filename, lineno, file=None, line=None):
        if issubclass(category, LikelyMistake):
            print(f"{prog}: warning: {_one_line(message)}", file=sys.stderr)
        else:
            default(message, category, filename, lineno, file, line)

    return show


def main(argv: Sequence[str] | None = None) -> int:
    """Run the ``obbiou`` command line; returns the exit status.

    Parameters
    ----------
    argv : sequence of str, optional
        The arguments (default: ``sys.argv[1:]``).

    Returns
    -------
    int
        0 on success, 2 for bad input (a one-line message on stderr, no traceback), 1 for a
        failed cluster task, 130 when interrupted.

    Examples
    --------
    >>> main(["demo", "--frames", "0"])  # one line on stderr, exit status 2
    2
    """
    parser = build_parser()
    try:
        args = parser.parse_args(argv)
    except SystemExit as exc:  # --help, --version, or a bad option (already reported)
        return int(exc.code or 0) if not isinstance(exc.code, str) else BAD_INPUT
    if args.command is None:
        parser.print_help()
        return BAD_INPUT
    prog = f"obbiou {args.command}"
    try:
        with warnings.catch_warnings():
            warnings.simplefilter("always", LikelyMistake)
            warnings.showwarning = _one_line_warning(prog)
            return int(args.run(args) or 0)
    except InvalidInput as exc:
        print(f"{prog}: error: {_one_line(exc)}", file=sys.stderr)
    except FileNotFoundError as exc:
        print(f"{prog}: error: {exc.filename or exc}: file not found", file=sys.stderr)
    except OSError as exc:  # unreadable files, an unreachable scheduler, a timeout
        where = f"{exc.filename}: " if getattr(exc, "filename", None) else ""
        print(f"{prog}: error: {where}{exc.strerror or _one_line(exc)}", file=sys.stderr)
    except ImportError as exc:
        name = (exc.name or "").split(".")[0]
        if name not in _EXTRAS:
            raise  # a broken installation of obbiou itself: a bug, with its traceback
        hint = f"pip install 'obbiou[{_EXTRAS[name]}]'"
        print(f"{prog}: error: this needs {name}, which is not installed; {hint}", file=sys.stderr)
    except KeyboardInterrupt:
        print(f"{prog}: interrupted", file=sys.stderr)
        return 130
    except TaskFailed as exc:
        print(f"{prog}: error: {_one_line(exc)}", file=sys.stderr)
        return 1
    return BAD_INPUT
