#!/usr/bin/env python3
"""Set up topoedge in ./.venv and run it, its tests or its benchmark.

    python3 tasks.py run [ARGS...]     set up, then `topoedge run ARGS` (default scenario)
    python3 tasks.py test [ARGS...]    set up, then pytest ARGS; fails if no test ran
    python3 tasks.py bench [ARGS...]   set up, then `topoedge bench ARGS`
    python3 tasks.py setup             set up only

Set-up is idempotent: the virtual environment is created when missing, kwant is
built from source only when it does not import yet (its released C sources
predate numpy 2, so Cython regenerates them; about 90 s on 2 cores), and the
package is (re)installed in editable mode when pyproject.toml changed.
Needs nothing but python3 (with venv and pip) and a C compiler.
"""

from __future__ import annotations

import hashlib
import os
import subprocess
import sys
import venv
from pathlib import Path

ROOT = Path(__file__).resolve().parent
VENV = ROOT / ".venv"
PY = VENV / "bin" / "python"
STAMP = VENV / ".topoedge-setup"
KWANT = "kwant==1.5.0"
KWANT_BUILD_DEPS = ["numpy", "scipy", "tinyarray", "cython", "setuptools", "wheel"]


def _run(*cmd: str | os.PathLike) -> None:
    print("+", " ".join(str(c) for c in cmd), flush=True)
    subprocess.run([str(c) for c in cmd], check=True)


def _imports(module: str) -> bool:
    return subprocess.run(
        [str(PY), "-W", "ignore", "-c", f"import {module}"], capture_output=True
    ).returncode == 0


def setup() -> None:
    if not PY.exists():
        print(f"creating virtual environment {VENV}", flush=True)
        venv.EnvBuilder(with_pip=True).create(VENV)
        _run(PY, "-m", "pip", "install", "-q", "--upgrade", "pip")
    if not _imports("kwant"):
        _run(PY, "-m", "pip", "install", "-q", *KWANT_BUILD_DEPS)
        print("building kwant from source (about 90 s) ...", flush=True)
        _run(PY, "-m", "pip", "install", "-q", "--no-build-isolation",
             "--config-settings=--build-option=--cython", KWANT)
    digest = hashlib.sha256((ROOT / "pyproject.toml").read_bytes()).hexdigest()
    if not (STAMP.exists() and STAMP.read_text() == digest and _imports("topoedge")):
        _run(PY, "-m", "pip", "install", "-q", "-e", f"{ROOT}[test]")
        STAMP.write_text(digest)


def main(argv: list[str]) -> int:
    if not argv or argv[0] not in ("setup", "run", "test", "bench"):
        print(__doc__, file=sys.stderr)
        return 2
    task, rest = argv[0], [a for a in argv[1:] if a != "--"]
    try:
        setup()
    except subprocess.CalledProcessError as err:
        print(f"tasks.py: set-up failed at: {' '.join(map(str, err.cmd))}", file=sys.stderr)
        return 1
    if task == "setup":
        return 0
    if task == "test":
        code = subprocess.run([str(PY), "-m", "pytest", *rest], cwd=ROOT).returncode
        if code == 5:
            print("tasks.py: pytest collected no tests; that is a failure", file=sys.stderr)
            return 1
        return code
    return subprocess.run([str(PY), "-m", "topoedge", task, *rest]).returncode


if __name__ == "__main__":
    sys.exit(main(sys.argv[1:]))
