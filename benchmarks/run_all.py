"""Run every ``benchmarks/bench_*.py`` in turn with this interpreter.

Each benchmark runs as its own process from the repository root, with the root on
``PYTHONPATH``. Exits non-zero when any benchmark exits non-zero (an error; benchmarks do
not fail on a missed speed target).

Run: ``python benchmarks/run_all.py``
"""

from __future__ import annotations

import os
import subprocess
import sys
from pathlib import Path

HERE = Path(__file__).resolve().parent
ROOT = HERE.parent


def main() -> int:
    scripts = sorted(HERE.glob("bench_*.py"))
    if not scripts:
        print(f"no benchmarks found in {HERE}")
        return 1
    env = dict(os.environ)
    env["PYTHONPATH"] = os.pathsep.join(filter(None, [str(ROOT), env.get("PYTHONPATH")]))
    failed = []
    for script in scripts:
        print(f"=== {script.name}", flush=True)
        completed = subprocess.run([sys.executable, str(script)], cwd=ROOT, env=env, check=False)
        if completed.returncode != 0:
            failed.append(script.name)
            print(f"=== {script.name} exited with {completed.returncode}", flush=True)
    print(f"\n{len(scripts) - len(failed)} of {len(scripts)} benchmarks ran without error.")
    if failed:
        print("Failed: " + ", ".join(failed))
        return 1
    return 0


if __name__ == "__main__":
    sys.exit(main())
