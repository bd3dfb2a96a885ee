"""Start-up time of the command line and the package, against a bare ``import numpy``.

Each round runs, in a fresh interpreter each and in a shuffled order:

* the baseline ``python -c "import numpy"`` (every command needs numpy),
* ``layers check CASE`` on a small demo case,
* ``layers --version``,
* ``python -c "import layers"``.

It prints the median wall time of each and the median over rounds of the
ratio to the baseline of the same round (paired, so that a busy moment of the
machine slows both). Exit status 1 if ``layers check`` takes more than
``LIMIT`` times the baseline.

The units cache (see ``layers.units.registry``) lives in a temporary folder,
filled by a warm-up run that is not counted: the figures are those of every
start after the first (the first start, which fills the cache, is printed
apart).

    python benchmarks/bench_startup.py [--rounds 15]
"""

from __future__ import annotations

import argparse
import os
import random
import shutil
import statistics
import subprocess
import sys
import tempfile
import time
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]
CASE = ROOT / "cases" / "masonry-wall-hot-week.toml"
LIMIT = 4.0  # layers check within 4x a bare `import numpy`


def layers_command() -> list[str]:
    """The console script beside this interpreter, else ``python -m layers.cli``."""
    script = Path(sys.executable).with_name("layers")
    return [str(script)] if script.exists() else [sys.executable, "-m", "layers.cli"]


def wall_time(command: list[str], env: dict[str, str]) -> float:
    start = time.perf_counter()
    done = subprocess.run(command, env=env, cwd=ROOT, stdout=subprocess.DEVNULL, stderr=subprocess.PIPE, text=True)
    elapsed = time.perf_counter() - start
    if done.returncode != 0:
        raise SystemExit(f"{' '.join(command)} failed ({done.returncode}): {done.stderr.strip()}")
    return elapsed


def main() -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--rounds", type=int, default=15)
    args = parser.parse_args()

    cache = Path(tempfile.mkdtemp(prefix="layers-bench-cache-"))
    # Compiled bytecode as an installed package has it, kept in the temporary
    # folder (never in the checkout), even where PYTHONDONTWRITEBYTECODE is set:
    # without it every start compiles every layers module again.
    env = {k: v for k, v in os.environ.items() if k != "PYTHONDONTWRITEBYTECODE"}
    env.update(LAYERS_CACHE_DIR=str(cache / "layers"), PYTHONPYCACHEPREFIX=str(cache / "pycache"))
    layers = layers_command()
    commands = {
        "import numpy (baseline)": [sys.executable, "-c", "import numpy"],
        "layers check": [*layers, "check", str(CASE)],
        "layers --version": [*layers, "--version"],
        "import layers": [sys.executable, "-c", "import layers"],
    }
    try:
        for command in commands.values():  # .pyc files and the file system cache
            wall_time(command, env)
        shutil.rmtree(cache / "layers", ignore_errors=True)
        first = wall_time(commands["layers check"], env)  # fills the units cache
        times: dict[str, list[float]] = {name: [] for name in commands}
        for _ in range(args.rounds):
            order = list(commands)
            random.shuffle(order)
            for name in order:
                times[name].append(wall_time(commands[name], env))
    finally:
        shutil.rmtree(cache, ignore_errors=True)

    base = times["import numpy (baseline)"]
    print(f"start-up, {args.rounds} paired rounds, median wall time and median ratio to the baseline of the same round")
    ratios: dict[str, float] = {}
    for name, values in times.items():
        ratios[name] = statistics.median(v / b for v, b in zip(values, base))
        print(f"  {name:<24} {statistics.median(values) * 1000:7.0f} ms   x{ratios[name]:5.2f}")
    print(f"  (layers check with an empty units cache: {first * 1000:.0f} ms, one run)")
    check = ratios["layers check"]
    verdict = "within" if check <= LIMIT else "OVER"
    print(f"layers check: {check:.2f} x import numpy ({verdict} the {LIMIT:g}x target)")
    return 0 if check <= LIMIT else 1


if __name__ == "__main__":
    sys.exit(main())
