"""The ``obbiou`` command line: demo, evaluate, compare, suppress, overlap, warmup.

Run ``obbiou --help`` (or ``python -m obbiou --help``) for the list, and
``obbiou COMMAND --help`` for each command with an example. Tables are CSV, Parquet or JSON
Lines files with the columns of :mod:`obbiou.tables` (``frame, label[, score]`` and the box
columns of a layout).

Where things are: :mod:`obbiou.cli.entry` holds :func:`main` and assembles the parser;
:mod:`obbiou.cli.options` the option groups and value types the commands share; one module
per command (``demo``, ``evaluate``, ``compare``, ``suppress``, ``overlap``, ``warmup``),
each with ``SUMMARY``, ``EXAMPLE``, ``configure(parser)`` and ``run(args)``: parse, call the
library, print.
"""

from obbiou.cli.entry import build_parser, main

__all__ = ["main", "build_parser"]
