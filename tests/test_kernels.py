"""Each kernel compiles once: one signature per numba function after every kernel group
has run (docs/design.md, section 5). A second signature means a second compile on first
use — a literal constant passed between kernels, or an enum member instead of an int, once
cost whole seconds of the cold start (python bench/coldstart.py --profile)."""

from __future__ import annotations

import json
import os
import subprocess
import sys
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]

PROBE = """
import importlib, json, pkgutil
from numba.core.registry import CPUDispatcher
from obbiou.warmup import GROUPS, compile_group
for name, _ in GROUPS:
    compile_group(name)
import obbiou._kernels as K
twice = {}
for info in pkgutil.iter_modules(K.__path__):
    module = importlib.import_module("obbiou._kernels." + info.name)
    for attr, obj in vars(module).items():
        if isinstance(obj, CPUDispatcher) and obj.__module__ == module.__name__:
            if len(obj.signatures) > 1:
                twice[info.name + "." + attr] = [str(s) for s in obj.signatures]
print(json.dumps(twice))
"""


def test_every_kernel_compiles_one_signature_only():
    # in a fresh process, so that no other test's direct kernel calls add signatures
    env = dict(os.environ, PYTHONPATH=str(ROOT) + os.pathsep + os.environ.get("PYTHONPATH", ""))
    done = subprocess.run(
        [sys.executable, "-c", PROBE], capture_output=True, text=True, env=env, timeout=900
    )
    assert done.returncode == 0, done.stderr
    twice = json.loads(done.stdout.strip().splitlines()[-1])
    assert twice == {}
