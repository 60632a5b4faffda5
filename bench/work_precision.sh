#!/usr/bin/env bash
# Work-precision benchmark of the evolution integrator, in one command:
#
#   bash bench/work_precision.sh [--setup-only] [options of bench/bench_work_precision.py]
#   bash bench/work_precision.sh --thermosphere [options of bench/bench_thermosphere_sweep.py]
#
# 1. creates a virtual environment of its own for the benchmark-only peers (default
#    bench/.venv-peers, git-ignored; EXOSIEVE_PEERS_VENV=/path chooses another), apart from the
#    project's .venv and its dependencies;
# 2. installs into it numpy, scipy, numba, numbalsoda, jax and diffrax (the peers), mpmath and
#    periodictable (the reference checks); a package that cannot be installed is named and the
#    benchmark runs without it;
# 3. builds and installs exosieve from this work tree (committed or not) into it, again only
#    when a source file changed since the last build (the CMake build directory is kept in the
#    environment, so a rebuild compiles only what changed);
# 4. runs bench/bench_work_precision.py (with --thermosphere: bench/bench_thermosphere_sweep.py,
#    the thermosphere case against scipy and numba) with the remaining arguments.
#
# Safe to run again: each step does only what is missing. PYTHON chooses the interpreter that
# creates the environment (default python3).
set -euo pipefail
root="$(cd "$(dirname "$0")/.." && pwd)"
venv="${EXOSIEVE_PEERS_VENV:-$root/bench/.venv-peers}"
setup_only=0
bench="bench_work_precision.py"
if [ "${1:-}" = "--setup-only" ]; then
    setup_only=1
    shift
elif [ "${1:-}" = "--thermosphere" ]; then
    bench="bench_thermosphere_sweep.py"
    shift
fi
say() { echo "work-precision setup: $*"; }

if [ ! -x "$venv/bin/python" ]; then
    say "creating the virtual environment $venv"
    "${PYTHON:-python3}" -m venv "$venv"
fi
py="$venv/bin/python"
logs="$venv/logs"
mkdir -p "$logs"
pip() { "$py" -m pip --disable-pip-version-check "$@"; }

# Peers and reference libraries: "pip package:module to import".
peers=(numpy:numpy scipy:scipy mpmath:mpmath periodictable:periodictable
       numba:numba numbalsoda:numbalsoda jax:jax diffrax:diffrax)
# Found without importing them (numbalsoda compiles for ~15 s when imported); the benchmark
# names any that then fails to import.
read -r -a missing <<<"$("$py" - "${peers[@]}" <<'EOF'
import importlib.util, sys
print(" ".join(e.split(":")[0] for e in sys.argv[1:] if not importlib.util.find_spec(e.split(":")[1])))
EOF
)"
if [[ " ${missing[*]} " == *" numbalsoda "* ]] && ! command -v gfortran >/dev/null; then
    # numbalsoda ships no wheel for this Python: its build compiles Fortran.
    say "installing the Debian package gfortran (numbalsoda's build needs it)"
    sudo=""
    if [ "$(id -u)" -ne 0 ]; then sudo="sudo"; fi
    { $sudo apt-get update -qq && DEBIAN_FRONTEND=noninteractive $sudo apt-get install -y -qq \
        gfortran; } >"$logs/apt-gfortran.log" 2>&1 ||
        say "could not install gfortran (see $logs/apt-gfortran.log)"
fi
if [ ${#missing[@]} -gt 0 ]; then
    say "installing ${missing[*]}"
    if ! pip install "${missing[@]}" >"$logs/pip-peers.log" 2>&1; then
        say "installing them together failed; one at a time (logs in $logs)"
        for pkg in "${missing[@]}"; do
            pip install "$pkg" >"$logs/pip-$pkg.log" 2>&1 ||
                say "could not install $pkg (see $logs/pip-$pkg.log); the benchmark runs without it"
        done
    fi
fi

# exosieve from this work tree: the files the build reads, tracked or new (not ignored ones such
# as build trees and a compiled _core copied beside the package by a development build).
list="$logs/exosieve-files.txt"
git -C "$root" ls-files -co --exclude-standard -- CMakeLists.txt pyproject.toml README.md cpp \
    python data | grep -v -e '\.so$' -e '__pycache__' |
    while IFS= read -r f; do if [ -f "$root/$f" ]; then echo "$f"; fi; done >"$list"
stamp="$(cd "$root" && tr '\n' '\0' <"$list" | xargs -0 sha1sum | sha1sum | cut -d' ' -f1)"
if [ "$(cat "$venv/exosieve-stamp" 2>/dev/null || true)" != "$stamp" ] ||
    ! "$py" -c "import exosieve._core" >/dev/null 2>&1; then
    src="$venv/exosieve-src"
    rm -rf "$src"
    mkdir -p "$src"
    # tar keeps the files' times, so the kept build directory recompiles only changed files.
    (cd "$root" && tar -cf - -T "$list") | tar -xf - -C "$src"
    say "building exosieve from $root into $venv (the first build takes a few minutes)"
    if ! CMAKE_BUILD_PARALLEL_LEVEL="${CMAKE_BUILD_PARALLEL_LEVEL:-2}" pip install --config-settings=build-dir="$venv/exosieve-build" \
        "$src" >"$logs/pip-exosieve.log" 2>&1; then
        tail -n 30 "$logs/pip-exosieve.log"
        say "building exosieve failed (full log: $logs/pip-exosieve.log)"
        exit 1
    fi
    dirty="$(git -C "$root" status --porcelain -- CMakeLists.txt pyproject.toml cpp python data)"
    {
        echo "commit $(git -C "$root" rev-parse HEAD)$([ -n "$dirty" ] && echo ' with uncommitted changes')"
        echo "branch $(git -C "$root" rev-parse --abbrev-ref HEAD)"
        echo "built $(date -u +%Y-%m-%dT%H:%M:%SZ) from $root"
    } >"$venv/exosieve-source.txt"
    echo "$stamp" >"$venv/exosieve-stamp"
fi
say "ready: $("$py" -c 'import exosieve; print("exosieve", exosieve.__version__)'), $(head -n 1 "$venv/exosieve-source.txt")"

if [ "$setup_only" -eq 1 ]; then
    exit 0
fi
# The installed package, not the source folder: no PYTHONPATH.
exec env -u PYTHONPATH EXOSIEVE_BUILD_INFO="$venv/exosieve-source.txt" \
    "$py" "$root/bench/$bench" "$@"
