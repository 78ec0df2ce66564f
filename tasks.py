#!/usr/bin/env python3
"""Set up topoedge in ./.venv and run it, its tests, its benchmark or its documentation build.

    python3 tasks.py run [ARGS...]     set up, then `topoedge run ARGS` (default scenario)
    python3 tasks.py test [ARGS...]    set up, then pytest ARGS; fails if no test ran
    python3 tasks.py bench [ARGS...]   set up, then `topoedge bench ARGS`
    python3 tasks.py docs [ARGS...]    set up with the `docs` extra (Sphinx, numpydoc), then
                                       build the documentation site from scratch into
                                       docs/_build/html, every warning an error; ARGS go
                                       to sphinx-build
    python3 tasks.py setup             set up only
    python3 tasks.py install-check     install topoedge non-editable into a fresh
                                       .venv-install and run the default scenario
                                       from another directory (CI runs it)
    python3 tasks.py setup --mumps     set up with kwant's MUMPS solver (installs the
                                       system package libmumps-seq-dev with apt-get
                                       when missing; needs root) and rebuild kwant

Set-up is idempotent: the virtual environment is created when missing, kwant is
built from source only when it does not import yet (its released C sources
predate numpy 2, so Cython regenerates them; about 90 s on 2 cores), and the
package is (re)installed in editable mode when pyproject.toml changed (with
the `docs` extra as well for the docs task).
kwant is linked against the sequential MUMPS library when its headers are
installed (Debian/Ubuntu: libmumps-seq-dev); otherwise kwant uses SciPy's
sparse solver, which is correct and on the bars of this project about as fast.
Needs nothing but python3 (with venv and pip) and a C compiler.
"""

from __future__ import annotations

import hashlib
import os
import shutil
import subprocess
import sys
import venv
from pathlib import Path

ROOT = Path(__file__).resolve().parent
VENV = ROOT / ".venv"
PY = VENV / "bin" / "python"
WHEELS = VENV / "wheels"       # the kwant wheel built here, reused by install-check
STAMP = VENV / ".topoedge-setup"
DOCS_STAMP = VENV / ".topoedge-docs-setup"   # the `docs` extra installed for this pyproject.toml
DOCS = ROOT / "docs"
DOCS_HTML = DOCS / "_build" / "html"
KWANT = "kwant==1.5.0"
KWANT_BUILD_DEPS = ["numpy", "scipy", "tinyarray", "cython", "setuptools", "wheel"]
# Debian/Ubuntu: the MUMPS C header (libmumps-headers-dev) and the MPI stub of
# the sequential build (libmumps-seq-dev).
MUMPS_HEADERS = (Path("/usr/include/zmumps_c.h"), Path("/usr/include/mumps_seq/mpi.h"))
MUMPS_PACKAGE = "libmumps-seq-dev"
# kwant's build configuration for Debian's sequential MUMPS.
MUMPS_BUILD_CONF = """[mumps]
libraries = zmumps_seq mumps_common_seq
include_dirs = /usr/include/mumps_seq
"""


def _run(*cmd: str | os.PathLike) -> None:
    print("+", " ".join(str(c) for c in cmd), flush=True)
    subprocess.run([str(c) for c in cmd], check=True)


def _imports(module: str) -> bool:
    return subprocess.run(
        [str(PY), "-W", "ignore", "-c", f"import {module}"], capture_output=True
    ).returncode == 0


def _have_mumps_headers() -> bool:
    return all(path.exists() for path in MUMPS_HEADERS)


def _install_mumps_package() -> None:
    """apt-get install the sequential MUMPS headers and libraries (root only)."""
    if shutil.which("apt-get") is None:
        raise SystemExit(f"tasks.py: --mumps needs {MUMPS_HEADERS[0]}; no apt-get here: install the "
                         f"sequential MUMPS development files ({MUMPS_PACKAGE} on Debian/Ubuntu) by hand")
    sudo = [] if os.geteuid() == 0 else (["sudo"] if shutil.which("sudo") else None)
    if sudo is None:
        raise SystemExit(f"tasks.py: --mumps needs root to run apt-get install {MUMPS_PACKAGE}")
    _run(*sudo, "apt-get", "update", "-q")
    _run(*sudo, "env", "DEBIAN_FRONTEND=noninteractive", "apt-get", "install", "-y", "-q",
         "--no-install-recommends", MUMPS_PACKAGE)


def _build_kwant(mumps: bool) -> None:
    _run(PY, "-m", "pip", "install", "-q", *KWANT_BUILD_DEPS)
    options = ["--config-settings=--build-option=--cython"]
    if mumps:
        conf = VENV / "kwant-build.conf"
        conf.write_text(MUMPS_BUILD_CONF)
        options.append(f"--config-settings=--build-option=--configfile={conf}")
    print(f"building kwant from source{' with MUMPS' if mumps else ''} (about 90 s) ...", flush=True)
    # No wheel cache: a cached build would ignore the MUMPS configuration.
    WHEELS.mkdir(parents=True, exist_ok=True)
    for old in WHEELS.glob("kwant-*.whl"):
        old.unlink()
    _run(PY, "-m", "pip", "wheel", "-q", "--no-build-isolation", "--no-cache-dir", "--no-deps",
         "-w", WHEELS, *options, KWANT)
    _run(PY, "-m", "pip", "install", "-q", "--force-reinstall", "--no-deps", _kwant_wheel())


def _kwant_wheel() -> Path:
    wheels = sorted(WHEELS.glob("kwant-*.whl"))
    if not wheels:
        raise SystemExit(f"tasks.py: no kwant wheel in {WHEELS}")
    return wheels[-1]


def install_check() -> int:
    """Install topoedge (not editable) into a fresh .venv-install; run the default scenario elsewhere.

    The package's data (default scenario, presets, sweeps) must come with the
    installed package: the run happens in a temporary directory, away from
    the checkout, and must write its results folder.
    """
    import tempfile

    if not list(WHEELS.glob("kwant-*.whl")):
        _build_kwant(_have_mumps_headers())
    target = ROOT / ".venv-install"
    if target.exists():
        shutil.rmtree(target)
    print(f"creating virtual environment {target}", flush=True)
    venv.EnvBuilder(with_pip=True).create(target)
    tpy = target / "bin" / "python"
    _run(tpy, "-m", "pip", "install", "-q", "--upgrade", "pip")
    _run(tpy, "-m", "pip", "install", "-q", _kwant_wheel())
    _run(tpy, "-m", "pip", "install", "-q", str(ROOT))
    with tempfile.TemporaryDirectory() as tmp:
        for args in (["run"], ["run", "gaas-5T"]):
            out = Path(tmp) / f"out-{len(args)}"
            cmd = [str(target / "bin" / "topoedge"), *args, "--out", str(out), "--quiet"]
            print("+", " ".join(cmd), f"(in {tmp})", flush=True)
            code = subprocess.run(cmd, cwd=tmp).returncode
            if code != 0 or not (out / "summary.json").exists():
                print(f"tasks.py: the installed topoedge failed: {' '.join(args)} (exit {code})", file=sys.stderr)
                return 1
    print("tasks.py: the non-editable install runs the shipped scenarios from another directory", flush=True)
    return 0


def setup(mumps: bool = False, docs: bool = False) -> None:
    if not PY.exists():
        print(f"creating virtual environment {VENV}", flush=True)
        venv.EnvBuilder(with_pip=True).create(VENV)
        _run(PY, "-m", "pip", "install", "-q", "--upgrade", "pip")
    if mumps and not _have_mumps_headers():
        _install_mumps_package()
    if not _imports("kwant"):
        _build_kwant(_have_mumps_headers())
    elif mumps and not _imports("kwant.solvers.mumps"):
        _build_kwant(True)
    if mumps and not _imports("kwant.solvers.mumps"):
        raise SystemExit("tasks.py: kwant was built but its MUMPS solver does not import; "
                         f"check {' and '.join(map(str, MUMPS_HEADERS))} and the libraries "
                         "zmumps_seq, mumps_common_seq")
    digest = hashlib.sha256((ROOT / "pyproject.toml").read_bytes()).hexdigest()
    installed = STAMP.exists() and STAMP.read_text() == digest and _imports("topoedge")
    docs_installed = (DOCS_STAMP.exists() and DOCS_STAMP.read_text() == digest
                      and _imports("sphinx") and _imports("numpydoc"))
    if not installed or (docs and not docs_installed):
        _run(PY, "-m", "pip", "install", "-q", "-e", f"{ROOT}[{'test,docs' if docs else 'test'}]")
        STAMP.write_text(digest)
        if docs:
            DOCS_STAMP.write_text(digest)


def build_docs(args: list[str]) -> int:
    """Build the site from scratch (-E: every page read again, so no warning hides in a cache).

    Warnings are errors (-W), reported all at once (--keep-going). The
    configuration reference and the API page are generated from the code
    during the build (docs/_ext/), so nothing generated is kept in the tree.
    """
    cmd = [PY, "-m", "sphinx", "-b", "html", "-E", "-W", "--keep-going",
           "-d", DOCS / "_build" / "doctrees", *args, DOCS, DOCS_HTML]
    print("+", " ".join(str(c) for c in cmd), flush=True)
    code = subprocess.run([str(c) for c in cmd], cwd=ROOT).returncode
    if code != 0:
        print(f"tasks.py: the documentation build failed (sphinx-build exit {code}); "
              "every warning counts as an error", file=sys.stderr)
        return 1
    print(f"tasks.py: documentation built without warnings: {DOCS_HTML / 'index.html'}", flush=True)
    return 0


def main(argv: list[str]) -> int:
    if not argv or argv[0] not in ("setup", "run", "test", "bench", "docs", "install-check"):
        print(__doc__, file=sys.stderr)
        return 2
    task, rest = argv[0], [a for a in argv[1:] if a != "--"]
    mumps = task == "setup" and "--mumps" in rest
    if task == "setup" and set(rest) - {"--mumps"}:
        print(f"tasks.py setup: unknown option(s) {' '.join(sorted(set(rest) - {'--mumps'}))}; "
              "expected nothing or --mumps", file=sys.stderr)
        return 2
    try:
        setup(mumps, docs=task == "docs")
    except subprocess.CalledProcessError as err:
        print(f"tasks.py: set-up failed at: {' '.join(map(str, err.cmd))}", file=sys.stderr)
        return 1
    if task == "setup":
        return 0
    if task == "install-check":
        try:
            return install_check()
        except subprocess.CalledProcessError as err:
            print(f"tasks.py: install-check failed at: {' '.join(map(str, err.cmd))}", file=sys.stderr)
            return 1
    if task == "docs":
        return build_docs(rest)
    if task == "test":
        code = subprocess.run([str(PY), "-m", "pytest", *rest], cwd=ROOT).returncode
        if code == 5:
            print("tasks.py: pytest collected no tests; that is a failure", file=sys.stderr)
            return 1
        return code
    return subprocess.run([str(PY), "-m", "topoedge", task, *rest]).returncode


if __name__ == "__main__":
    sys.exit(main(sys.argv[1:]))
