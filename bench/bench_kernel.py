"""jeans_flux on 1e6- and 1e7-element arrays: exosieve against the same formula in numpy, in
jax.jit on the CPU and in numexpr (each where installed: bench/work_precision.sh's environment
has jax), and against this machine's memory ceiling measured in the same run.

Run: python bench/bench_kernel.py [--sizes 1e6,1e7] [--repeat R]
Prints millions of elements per second. Goals: exosieve >= 3x numpy, ahead of jax.jit, and
within 1.5x of the memory ceiling: 5 inputs read and 1 output written per element (48 bytes),
at the bandwidth of the fastest of numpy copies on 1 and on all cores (a copy moves 16 bytes
per element). The copy writes into an array it has written before (no page faults), so
exosieve is held to the ceiling writing into a given output (out=); against numpy and jax,
which return a new array, it returns one too.
"""

from __future__ import annotations

import argparse
import os
import threading
import time

import numpy as np

import exosieve
from exosieve.constants import AMU, K_B, M_EARTH, R_EARTH, G


def numpy_jeans_flux(density, temperature, mass, planet_mass, radius):
    lam = G * planet_mass * mass / (K_B * temperature * radius)
    v0 = np.sqrt(2.0 * K_B * temperature / mass)
    return density * v0 / (2.0 * np.sqrt(np.pi)) * (1.0 + lam) * np.exp(-lam)


def best_of(repeat, fn, *args):
    best = np.inf
    for _ in range(repeat):
        start = time.perf_counter()
        fn(*args)
        best = min(best, time.perf_counter() - start)
    return best


def copy_bandwidth(size: int, repeat: int) -> tuple[float, int]:
    """Bytes per second of np.copyto on `size` doubles (read + write), best of 1 thread and of
    one thread per core over equal slices (numpy copies without the interpreter lock)."""
    src, dst = np.ones(size), np.zeros(size)
    best, threads_best = 0.0, 1
    for threads in sorted({1, os.cpu_count() or 1}):
        bounds = np.linspace(0, size, threads + 1).astype(int)

        def part(k: int, bounds=bounds) -> None:
            np.copyto(dst[bounds[k] : bounds[k + 1]], src[bounds[k] : bounds[k + 1]])

        for _ in range(repeat):
            start = time.perf_counter()
            pool = [threading.Thread(target=part, args=(k,)) for k in range(threads)]
            for t in pool:
                t.start()
            for t in pool:
                t.join()
            rate = 16.0 * size / (time.perf_counter() - start)
            if rate > best:
                best, threads_best = rate, threads
    return best, threads_best


def peers() -> dict[str, object]:
    """The compiled peers that are installed: name -> callable on the five arrays."""
    found: dict[str, object] = {}
    try:
        import jax

        jax.config.update("jax_enable_x64", True)
        import jax.numpy as jnp

        @jax.jit
        def jax_flux(n, t, m, big_m, r):
            lam = G * big_m * m / (K_B * t * r)
            v0 = jnp.sqrt(2.0 * K_B * t / m)
            return n * v0 / (2.0 * np.sqrt(np.pi)) * (1.0 + lam) * jnp.exp(-lam)

        def run_jax(*a):
            return jax_flux(*a).block_until_ready()

        found[f"jax.jit {jax.__version__} (CPU)"] = (run_jax, lambda a: [jnp.asarray(x) for x in a])
    except ImportError:
        pass
    try:
        import numexpr

        lam = "(g * bm * m / (kb * t * r))"
        expr = f"n * sqrt(2 * kb * t / m) * c * (1 + {lam}) * exp(-{lam})"

        def run_numexpr(n, t, m, bm, r):
            return numexpr.evaluate(
                expr,
                local_dict={
                    "n": n,
                    "t": t,
                    "m": m,
                    "bm": bm,
                    "r": r,
                    "kb": K_B,
                    "g": G,
                    "c": 1 / (2 * np.sqrt(np.pi)),
                },
            )

        found[f"numexpr {numexpr.__version__}"] = (run_numexpr, lambda a: list(a))
    except ImportError:
        pass
    return found


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--sizes", default="1e6,1e7", help="comma-separated array lengths")
    parser.add_argument("--repeat", type=int, default=20, help="timed repetitions (best kept)")
    opts = parser.parse_args()
    compiled = peers()
    print(f"exosieve {exosieve.__version__}, {os.cpu_count()} cores; best of {opts.repeat}")
    for n in (int(float(x)) for x in opts.sizes.split(",")):
        rng = np.random.default_rng(0)
        args = (
            rng.uniform(1e8, 1e14, n),
            rng.uniform(300.0, 5000.0, n),
            rng.uniform(1.0, 44.0, n) * AMU,
            rng.uniform(0.1, 10.0, n) * M_EARTH,
            rng.uniform(1.0, 2.5, n) * R_EARTH,
        )
        ours = exosieve.jeans_flux(*args)
        peer = numpy_jeans_flux(*args)
        # Compare where numpy's exp(-lambda) is a normal double (beyond, it has few digits).
        lam = G * args[3] * args[2] / (K_B * args[1] * args[4])
        normal = lam < 708.0
        worst = np.max(np.abs(ours[normal] - peer[normal]) / peer[normal])
        bandwidth, threads = copy_bandwidth(n, opts.repeat)
        ceiling = bandwidth / 48.0
        # A new output array per call, as the peers return one; and into a given output
        # (out=), warm like the copy's destination: the one compared with the ceiling.
        t_ours = best_of(opts.repeat, exosieve.jeans_flux, *args)
        warm = np.empty(n)
        t_warm = best_of(opts.repeat, lambda a=args, o=warm: exosieve.jeans_flux(*a, out=o))
        print(f"jeans_flux, {n:.0e} elements, 5 array arguments [M elements/s]:")
        print(
            f"  memory ceiling : {ceiling / 1e6:7.0f}  (copy at {bandwidth / 1e9:.1f} GB/s on "
            f"{threads} thread(s) into a warm array, 48 bytes per element)"
        )
        print(
            f"  exosieve out=  : {n / t_warm / 1e6:7.0f}  ({ceiling * t_warm / n:.2f}x the "
            f"ceiling's time; goal <= 1.5x)"
        )
        print(
            f"  exosieve       : {n / t_ours / 1e6:7.0f}  (a new output array per call, as the "
            f"peers below)"
        )
        t_numpy = best_of(opts.repeat, numpy_jeans_flux, *args)
        print(
            f"  numpy          : {n / t_numpy / 1e6:7.0f}  (exosieve {t_numpy / t_ours:.1f}x "
            f"faster; goal >= 3x)"
        )
        for name, (run, convert) in compiled.items():
            inputs = convert(args)
            theirs = np.asarray(run(*inputs))
            diff = np.max(np.abs(theirs[normal] - peer[normal]) / peer[normal])
            t_peer = best_of(opts.repeat, run, *inputs)
            print(
                f"  {name:<15}: {n / t_peer / 1e6:7.0f}  (exosieve {t_peer / t_ours:.2f}x "
                f"faster; largest relative difference to numpy {diff:.0e})"
            )
        print(
            f"  largest relative difference exosieve - numpy where exp(-lambda) is a normal "
            f"double: {worst:.1e} ({normal.mean():.0%} of elements)"
        )


if __name__ == "__main__":
    main()
