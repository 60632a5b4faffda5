"""jeans_flux on 1e6-element arrays: exosieve against the same formula in numpy.

Run: python bench/bench_kernel.py [--size N] [--repeat R]
Prints the best time of each and the ratio (goal: exosieve >= 3x faster than numpy).
"""

from __future__ import annotations

import argparse
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


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--size", type=int, default=1_000_000, help="array length")
    parser.add_argument("--repeat", type=int, default=20, help="timed repetitions (best kept)")
    opts = parser.parse_args()

    rng = np.random.default_rng(0)
    n = opts.size
    args = (
        rng.uniform(1e8, 1e14, n),
        rng.uniform(300.0, 5000.0, n),
        rng.uniform(1.0, 44.0, n) * AMU,
        rng.uniform(0.1, 10.0, n) * M_EARTH,
        rng.uniform(1.0, 2.5, n) * R_EARTH,
    )

    ours = exosieve.jeans_flux(*args)
    peer = numpy_jeans_flux(*args)
    # Compare where numpy's exp(-lambda) is a normal double (beyond, it carries few digits).
    lam = G * args[3] * args[2] / (K_B * args[1] * args[4])
    normal = lam < 708.0
    worst = np.max(np.abs(ours[normal] - peer[normal]) / peer[normal])

    t_ours = best_of(opts.repeat, exosieve.jeans_flux, *args)
    t_peer = best_of(opts.repeat, numpy_jeans_flux, *args)
    print(f"jeans_flux, {n:.0e} elements, 5 array arguments, best of {opts.repeat}")
    print(f"  exosieve : {t_ours * 1e3:8.2f} ms")
    print(f"  numpy    : {t_peer * 1e3:8.2f} ms")
    print(f"  ratio numpy/exosieve: {t_peer / t_ours:.1f}x   (goal >= 3x)")
    print(
        f"  largest relative difference where exp(-lambda) is a normal double: {worst:.1e}"
        f" ({normal.mean():.0%} of elements)"
    )


if __name__ == "__main__":
    main()
