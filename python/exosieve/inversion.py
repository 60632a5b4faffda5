"""The initial inventory that reproduces a measured present-day isotope ratio.

:func:`invert_ratio` (one model, as :func:`exosieve.evolve` takes it) and :func:`invert_case`
(a row of a case table) find the total initial inventory ``S`` [particles] of the scaled species
(by default the ratio's two species, e.g. D and H) for which the ratio at the end of the run,
``R(t_end) = N_num / N_den``, equals the measured one. The scaled species keep their initial
proportions (so the initial ratio ``R0`` is the model's); everything else stays as given:
the other inventories, sources and given losses, and the upper atmosphere at the start
(exobase radius and densities, or the homopause of a thermosphere). A larger ``S`` is a larger
reservoir drained by the same initial escape, so ``R(t_end)`` moves less far from ``R0``.

The root of ``ln R(t_end) - ln R_measured`` is sought in ``ln S`` by the C++ core: a bracket
search outward from the nominal inventory (1, 2, 4, 8, ... decades up and down in turn, within
``[S / search_factor, S * search_factor]`` or the bounds given), then TOMS 748 (Alefeld, Potra &
Shi 1995) to ``tolerance`` in ``ln S``. A bracket with an end where the numerator or the
denominator falls below ``depletion_fraction`` is searched for a root among the undepleted
inventories first, and kept only when no other is found (a loss that does not follow the
inventory holds a depleted species at that level, and the ratio then turns back). When the
ratio never reaches the measured value at the inventories tried there is no solution, and the
result says so with the range searched and the ratio at its ends; nothing is raised.

With samples, each one draws the measured ratio (normal, truncated to > 0, or log-normal) and,
for a case row, every stated uncertainty of the row as :func:`exosieve.compare` draws it
(sample ``j`` of row ``k`` depends only on (seed, k, j)), on a pool of threads.
"""

from __future__ import annotations

from collections.abc import Callable, Mapping, Sequence
from dataclasses import dataclass, field
from typing import Any

import numpy as np
from numpy.typing import NDArray

from . import _core
from . import constants as c
from ._arrays import real_number, whole_number
from .catalogue import load_cases
from .evolution import ExobaseLike, _build_config
from .hydrodynamic import EnergyLimitedEscape, as_thresholds
from .ocean import WATER_DENSITY, hydrogen_atoms, hydrogen_to_ocean_depth
from .stellar import Planet

__all__ = ["RatioInversion", "InversionSamples", "invert_ratio", "invert_case", "STATUSES"]

#: How an inversion ends: a solution; no solution in the range searched; a run failed where the
#: search needed it; cancelled (or never run).
STATUSES = ("solved", "no_solution", "failed", "cancelled")

_PERCENTILES = (5.0, 16.0, 50.0, 84.0, 95.0)


@dataclass(frozen=True)
class InversionSamples:
    """Monte Carlo inversions, one entry per sample (arrays of shape (sample,) unless said).

    Attributes
    ----------
    species : list of str
        The model's species (columns of the per-species arrays).
    target : ndarray
        The drawn ratio sought at the end [1] (NaN where it could not be formed).
    status : ndarray of str
        One of :data:`STATUSES` per sample.
    initial_ratio, ratio : ndarray
        Ratio at the start and at the end of the solution [1].
    total_initial : ndarray
        Total initial inventory of the scaled species [particles]; NaN unless solved.
    total_lost : ndarray
        Of it, lost by the end [particles]; NaN unless solved.
    initial_inventory, final_inventory : ndarray
        Per sample and species [particles], shape (sample, species); NaN unless solved.
    depleted : ndarray of bool
        The solution depletes the numerator or the denominator (see :class:`RatioInversion`).
    bracket_low, bracket_high : ndarray
        The final bracket of the total [particles], or the range searched without a solution.
    ratio_low, ratio_high : ndarray
        The ratio at the end at those two inventories [1].
    runs : ndarray of int
        Evolution runs of each inversion.
    planet_radius : ndarray
        Each sample's planet radius [m].
    scaled : list of str
        The species scaled together.
    message : list of str
        "" when solved, else why not.
    cancelled : bool
        True when the Monte Carlo run was stopped before the end.
    """

    species: list[str]
    target: NDArray[np.float64]
    status: NDArray[np.str_]
    initial_ratio: NDArray[np.float64]
    ratio: NDArray[np.float64]
    total_initial: NDArray[np.float64]
    total_lost: NDArray[np.float64]
    initial_inventory: NDArray[np.float64]
    final_inventory: NDArray[np.float64]
    depleted: NDArray[np.bool_]
    bracket_low: NDArray[np.float64]
    bracket_high: NDArray[np.float64]
    ratio_low: NDArray[np.float64]
    ratio_high: NDArray[np.float64]
    runs: NDArray[np.int64]
    planet_radius: NDArray[np.float64]
    scaled: list[str]
    message: list[str]
    cancelled: bool

    def __len__(self) -> int:
        return int(self.target.size)

    @property
    def solved(self) -> NDArray[np.bool_]:
        """True for the samples with a solution."""
        return np.asarray(self.status == "solved")

    @property
    def counts(self) -> dict[str, int]:
        """Number of samples per status (every status of :data:`STATUSES`)."""
        return {s: int(np.count_nonzero(self.status == s)) for s in STATUSES}

    def quantiles(
        self, percentiles: Sequence[float] = _PERCENTILES
    ) -> dict[str, NDArray[np.float64]]:
        """Percentiles over the solved samples of ``total_initial`` and ``total_lost``
        [particles], and of ``target`` [1] (all NaN when no sample is solved).

        Parameters
        ----------
        percentiles : sequence of float, optional
            Percentiles in [0, 100] [%]; default 5, 16, 50, 84, 95.

        Returns
        -------
        dict of str to ndarray
            ``{"percentile": q, "total_initial": ..., "total_lost": ..., "target": ...}``.
            Samples without a solution are not in them: see :attr:`counts`.
        """
        q = _percentiles(percentiles)
        keep = self.solved
        out: dict[str, NDArray[np.float64]] = {"percentile": q}
        for name in ("total_initial", "total_lost", "target"):
            values = getattr(self, name)[keep]
            out[name] = np.percentile(values, q) if values.size else np.full(q.shape, np.nan)
        return out

    def lost(self) -> NDArray[np.float64]:
        """Lost by the end per sample and species, ``initial - final`` [particles]."""
        return np.asarray(self.initial_inventory - self.final_inventory)

    def ocean_depth(self, density: float = WATER_DENSITY) -> dict[str, NDArray[np.float64]]:
        """The hydrogen of the scaled species as global oceans of water on each sample's
        planet: depth [m] of its initial amount and of its loss (NaN unless solved).

        Parameters
        ----------
        density : float, optional
            Density of liquid water [kg m^-3]; default 1000 (common practice).
        """
        weights = _hydrogen_weights(self.species, self.scaled)
        return {
            "initial": _depth(self.initial_inventory @ weights, self.planet_radius, density),
            "lost": _depth(self.lost() @ weights, self.planet_radius, density),
        }


@dataclass(frozen=True)
class RatioInversion:
    """The initial inventory that reproduces a measured isotope ratio, and its samples.

    Attributes
    ----------
    ratio : str
        The ratio, "numerator/denominator" (e.g. "D/H").
    measured : float
        The measured value [1]: the ratio at the end, or with ``relative`` the enrichment
        ``R(t_end) / R(t_start)``.
    sigma : float
        Its uncertainty [1]: a normal standard deviation, or with ``lognormal`` the standard
        deviation of its logarithm; 0 when exact.
    lognormal : bool
        ``sigma`` is log-normal (``measured`` its median).
    relative : bool
        ``measured`` is the enrichment over the initial ratio.
    species : list of str
        The model's species.
    scaled : list of str
        The species whose initial inventories were scaled together (proportions held).
    status : str
        One of :data:`STATUSES` for the nominal inversion (the model and the measured value as
        given).
    message : str
        Why it is not solved (the range searched, the ratio at its ends, a failed run's
        message); when solved, empty or a warning.
    target : float
        The ratio sought at the end [1].
    initial_ratio : float
        The ratio at the start [1].
    ratio_reached : float
        The ratio at the end of the solution's run [1] (NaN unless solved).
    total_initial : float
        Total initial inventory of the scaled species [particles] (NaN unless solved).
    total_lost : float
        Of it, lost by the end [particles] (NaN unless solved).
    initial_inventory, final_inventory : dict of str to float
        Each species' inventory at the start and at the end of the solution [particles].
    depleted : bool
        The solution takes the numerator or the denominator below ``depletion_fraction`` of its
        start. Where a loss does not follow the inventory (fixed exobase densities, given
        losses, energy-limited escape) the species is then held at that level, and the ratio
        describes that level rather than the physics.
    bracket : (float, float)
        Solved: the final bracket of the total [particles], as narrow as ``tolerance``.
        Otherwise: the extreme inventories searched.
    bracket_ratio : (float, float)
        The ratio at the end at those two inventories [1].
    runs : int
        Evolution runs made.
    planet_radius : float
        The planet's radius [m].
    samples : InversionSamples or None
        The Monte Carlo inversions (None without samples).
    """

    ratio: str
    measured: float
    sigma: float
    lognormal: bool
    relative: bool
    species: list[str]
    scaled: list[str]
    status: str
    message: str
    target: float
    initial_ratio: float
    ratio_reached: float
    total_initial: float
    total_lost: float
    initial_inventory: dict[str, float]
    final_inventory: dict[str, float]
    depleted: bool
    bracket: tuple[float, float]
    bracket_ratio: tuple[float, float]
    runs: int
    planet_radius: float
    samples: InversionSamples | None = field(default=None, repr=False)

    @property
    def solved(self) -> bool:
        """True when the nominal inversion found a solution."""
        return self.status == "solved"

    @property
    def lost(self) -> dict[str, float]:
        """Each species' loss by the end, ``initial - final`` [particles]."""
        return {
            name: self.initial_inventory[name] - self.final_inventory[name] for name in self.species
        }

    def ocean_depth(self, density: float = WATER_DENSITY) -> dict[str, float]:
        """The hydrogen of the scaled species as global oceans of water on the planet: depth
        [m] of its initial amount and of its loss (NaN unless solved). Hydrogen atoms are
        counted from each species' formula (H and D one each, H2 and HD two, ...).

        Parameters
        ----------
        density : float, optional
            Density of liquid water [kg m^-3]; default 1000 (common practice).

        Raises
        ------
        ValueError
            When the scaled species hold no hydrogen.
        """
        weights = _hydrogen_weights(self.species, self.scaled)
        initial = np.asarray([self.initial_inventory[s] for s in self.species])
        final = np.asarray([self.final_inventory[s] for s in self.species])
        return {
            "initial": float(_depth(initial @ weights, self.planet_radius, density)),
            "lost": float(_depth((initial - final) @ weights, self.planet_radius, density)),
        }

    def __str__(self) -> str:
        lines = [f"{self.ratio} = {self.target:.6g} at the end (start {self.initial_ratio:.6g})"]
        scaled = ", ".join(self.scaled)
        if self.solved:
            lines.append(
                f"  initial {scaled}: {self.total_initial:.6g} particles, lost "
                f"{self.total_lost:.6g} ({self.runs} runs)"
            )
        else:
            lines.append(f"  {self.status}: {self.message}")
        if self.solved and self.message:
            lines.append(f"  note: {self.message}")
        if self.samples is not None:
            counts = ", ".join(f"{v} {k}" for k, v in self.samples.counts.items() if v)
            lines.append(f"  {len(self.samples)} samples: {counts}")
        return "\n".join(lines)


def _hydrogen_weights(species: Sequence[str], scaled: Sequence[str]) -> NDArray[np.float64]:
    """Hydrogen atoms per particle of each species, 0 for species not scaled."""
    weights = np.asarray([hydrogen_atoms(s) if s in scaled else 0 for s in species], dtype=float)
    if not weights.any():
        raise ValueError(f"ocean_depth: the scaled species ({', '.join(scaled)}) hold no hydrogen")
    return weights


def _depth(atoms: Any, radius: Any, density: float) -> NDArray[np.float64]:
    """Global-ocean depth [m] of ``atoms`` hydrogen atoms, negative for a gain (a source
    outpacing the loss); NaN where ``atoms`` is NaN."""
    atoms, radius = np.broadcast_arrays(np.asarray(atoms, float), np.asarray(radius, float))
    good = np.isfinite(atoms) & np.isfinite(radius)
    out = np.full(atoms.shape, np.nan)
    depth = hydrogen_to_ocean_depth(np.abs(atoms[good]), radius[good], density)
    out[good] = np.sign(atoms[good]) * depth
    return out


def _percentiles(percentiles: Sequence[float]) -> NDArray[np.float64]:
    try:
        if isinstance(percentiles, (str, bytes)) or any(
            isinstance(v, (bool, np.bool_)) for v in percentiles
        ):
            raise TypeError("not numbers")
        q = np.asarray([float(v) for v in percentiles], dtype=float)
    except (TypeError, ValueError) as err:
        raise ValueError(f"percentiles must be numbers in [0, 100], got {percentiles!r}") from err
    if q.size == 0 or not np.all((q >= 0.0) & (q <= 100.0)):
        raise ValueError(f"percentiles must be numbers in [0, 100], got {percentiles!r}")
    return q


def _ratio(ratio: Any) -> tuple[str, str]:
    if isinstance(ratio, str) and ratio.count("/") == 1:
        numerator, denominator = (part.strip() for part in ratio.split("/"))
    elif isinstance(ratio, (tuple, list)) and len(ratio) == 2:
        numerator, denominator = (str(part) for part in ratio)
    else:
        raise ValueError(f"ratio must be 'numerator/denominator' (e.g. 'D/H'), got {ratio!r}")
    if not numerator or not denominator:
        raise ValueError(f"ratio must be 'numerator/denominator' (e.g. 'D/H'), got {ratio!r}")
    return numerator, denominator


def _measurement(
    measured: Any, sigma: Any, lnsigma: Any, relative: bool
) -> tuple[float, float, bool]:
    what = "measured enrichment" if relative else "measured ratio"
    value = real_number(measured, "measured", "1")
    if not value > 0.0:
        raise ValueError(f"measured ({what}) must be > 0 [1], got {value!r}")
    width = 0.0 if sigma is None else real_number(sigma, "sigma", "1")
    if width < 0.0:
        raise ValueError(f"sigma must be >= 0 [1], got {width!r}")
    if lnsigma is None:
        return value, width, False
    log_width = real_number(lnsigma, "lnsigma", "1")
    if log_width < 0.0:
        raise ValueError(f"lnsigma must be >= 0 [1], got {log_width!r}")
    if width != 0.0:
        raise ValueError("give either sigma (normal) or lnsigma (log-normal), not both")
    return value, log_width, True


def _search_options(
    scaled: Sequence[str] | None,
    inventory_min: Any,
    inventory_max: Any,
    search_factor: Any,
    tolerance: Any,
    max_runs: Any,
) -> dict[str, Any]:
    if scaled is not None and (isinstance(scaled, str) or not isinstance(scaled, Sequence)):
        raise ValueError(f"scaled must be a sequence of species names, got {scaled!r}")
    names = [str(s) for s in scaled] if scaled is not None else []
    bounds = {}
    for name, value in (("inventory_min", inventory_min), ("inventory_max", inventory_max)):
        bounds[name] = 0.0 if value is None else real_number(value, name, "1")
        if value is not None and not bounds[name] > 0.0:
            raise ValueError(f"{name} must be > 0 [particles], got {bounds[name]!r}")
    return {
        "scaled": names,
        "search_factor": real_number(search_factor, "search_factor", "1"),
        "tolerance": real_number(tolerance, "tolerance", "1"),
        "max_runs": whole_number(max_runs, "max_runs", 2, " [runs]"),
        **bounds,
    }


def _sampling(samples: Any, seed: Any, threads: Any, progress_every: Any) -> dict[str, int]:
    return {
        "samples": whole_number(samples, "samples", 0),
        "seed": whole_number(seed, "seed", 0),
        "threads": 0 if threads is None else whole_number(threads, "threads", 1),
        "progress_every": 0
        if progress_every is None
        else whole_number(progress_every, "progress_every", 1, " [inversions]"),
    }


def _progress(progress: Any) -> Any:
    if progress is not None and not callable(progress):
        raise ValueError(
            f"progress must be a callable progress(done, total) or None, got {progress!r}"
        )
    return progress


def _result(
    raw: Mapping[str, Any],
    ratio: tuple[str, str],
    value: float,
    width: float,
    lognormal: bool,
    relative: bool,
    samples: int,
) -> RatioInversion:
    nominal = raw["nominal"]
    species = list(raw["species"])
    scaled = [s for s, flag in zip(nominal["species"], nominal["scaled"], strict=True) if flag]
    drawn = None
    if samples:
        drawn = InversionSamples(
            species=species,
            target=np.asarray(raw["target"]),
            status=np.asarray(raw["status"], dtype=str),
            initial_ratio=np.asarray(raw["initial_ratio"]),
            ratio=np.asarray(raw["ratio"]),
            total_initial=np.asarray(raw["scaled_initial"]),
            total_lost=np.asarray(raw["scaled_lost"]),
            initial_inventory=np.asarray(raw["initial_inventory"]),
            final_inventory=np.asarray(raw["final_inventory"]),
            depleted=np.asarray(raw["depleted"]) == 1,
            bracket_low=np.asarray(raw["bracket_low"]),
            bracket_high=np.asarray(raw["bracket_high"]),
            ratio_low=np.asarray(raw["ratio_low"]),
            ratio_high=np.asarray(raw["ratio_high"]),
            runs=np.asarray(raw["runs"]),
            planet_radius=np.asarray(raw["planet_radius"]),
            scaled=scaled,
            message=list(raw["message"]),
            cancelled=bool(raw["cancelled"]),
        )
    return RatioInversion(
        ratio=f"{ratio[0]}/{ratio[1]}",
        measured=value,
        sigma=width,
        lognormal=lognormal,
        relative=relative,
        species=species,
        scaled=scaled,
        status=str(nominal["status"]),
        message=str(nominal["message"]),
        target=float(nominal["target"]),
        initial_ratio=float(nominal["initial_ratio"]),
        ratio_reached=float(nominal["ratio"]),
        total_initial=float(nominal["scaled_initial"]),
        total_lost=float(nominal["scaled_lost"]),
        initial_inventory=dict(zip(species, map(float, nominal["initial_inventory"]), strict=True)),
        final_inventory=dict(zip(species, map(float, nominal["final_inventory"]), strict=True)),
        depleted=bool(nominal["depleted"]),
        bracket=(float(nominal["bracket_low"]), float(nominal["bracket_high"])),
        bracket_ratio=(float(nominal["ratio_low"]), float(nominal["ratio_high"])),
        runs=int(nominal["runs"]),
        planet_radius=float(nominal["planet_radius"]),
        samples=drawn,
    )


def invert_ratio(
    planet: Planet,
    exobase: ExobaseLike,
    inventory: Mapping[str, Any],
    t_span: Sequence[Any],
    *,
    ratio: str | tuple[str, str],
    measured: float,
    sigma: float = 0.0,
    lnsigma: float | None = None,
    relative: bool = False,
    scaled: Sequence[str] | None = None,
    inventory_min: float | None = None,
    inventory_max: float | None = None,
    search_factor: float = 1e10,
    tolerance: float = 1e-9,
    max_runs: int = 200,
    samples: int = 0,
    seed: int = 0,
    threads: int | None = None,
    progress: Callable[[int, int], Any] | None = None,
    progress_every: int | None = None,
    rtol: float = 1e-8,
    atol: None | float | Mapping[str, float] = None,
    depletion_fraction: float = 1e-3,
    sources: Mapping[str, Any] | None = None,
    given_losses: Mapping[str, Any] | None = None,
    hydrodynamic: EnergyLimitedEscape | None = None,
    thresholds: Any = None,
    tail_depletion: Any = 1.0,
    max_steps: int = 100_000,
    exobase_temperature: Any = None,
    limit_by_diffusion: bool = True,
    stepper: str = "auto",
) -> RatioInversion:
    """The initial inventory of one model that gives a measured isotope ratio at the end.

    The model is given as to :func:`exosieve.evolve`; ``inventory`` sets the nominal inventory
    (where the search starts) and the proportions of the scaled species, so also the initial
    ratio (e.g. ``{"H": 1e44, "D": 1.5576e-4 * 1e44}`` for D/H at VSMOW's 155.76 ppm).

    Parameters
    ----------
    planet, exobase, inventory, t_span
        As for :func:`exosieve.evolve`; ``t_span`` ends at the time of the measurement.
    ratio : str or (str, str)
        The measured ratio, ``"numerator/denominator"`` (e.g. ``"D/H"``, ``"36Ar/38Ar"``).
    measured : float
        Its measured value at ``t_span[1]`` [1] (> 0); with ``relative``, the enrichment
        ``R(t_end) / R(t_start)`` [1].
    sigma : float, optional
        Its standard uncertainty [1] (normal; draws truncated to > 0). Default 0: exact.
    lnsigma : float, optional
        Instead of ``sigma``: the standard deviation of ``ln(measured)`` [1] (log-normal,
        ``measured`` the median).
    relative : bool, optional
        ``measured`` (and its uncertainty) is the enrichment over the initial ratio.
    scaled : sequence of str, optional
        Species whose initial inventories are scaled together (their proportions held);
        default the ratio's two species. Must include both.
    inventory_min, inventory_max : float, optional
        Bounds of the total initial inventory of the scaled species searched [particles];
        default the nominal total divided and multiplied by ``search_factor``.
    search_factor : float, optional
        Searchable range around the nominal total [1] (> 1); default 1e10.
    tolerance : float, optional
        Width of the final bracket in ``ln`` of the total [1] (its relative width); default
        1e-9. The solution's accuracy is also bounded by ``rtol / |d ln R / d ln S|``.
    max_runs : int, optional
        Evolution runs allowed per inversion [runs]; default 200.
    samples : int, optional
        Monte Carlo samples of the measured ratio (0: the nominal inversion only).
    seed : int, optional
        Seed of the draws; sample ``j`` depends only on (seed, j).
    threads : int, optional
        Threads for the samples (default: all cores; one with a Python temperature callable).
    progress : callable, optional
        Called as ``progress(done, total)`` with inversions done and in total, about every
        0.1 s (or as ``progress_every`` says) and at the end; returning False stops. Ctrl-C
        stops with KeyboardInterrupt.
    progress_every : int, optional
        Call ``progress`` when the first k, 2k, ... inversions (in order) are done, instead of
        by time [inversions]; stopping at the m-th call keeps exactly the first k m.
    rtol, atol, depletion_fraction, sources, given_losses, hydrodynamic, thresholds, \
tail_depletion, max_steps, exobase_temperature, limit_by_diffusion, stepper
        As for :func:`exosieve.evolve` (``rtol`` default 1e-8). An explicit ``atol`` of a
        scaled species is scaled with it.

    Returns
    -------
    RatioInversion
        ``status`` "solved" with ``total_initial`` and ``total_lost`` [particles]; or
        "no_solution" with the range searched (``bracket``) and the ratio at its ends
        (``bracket_ratio``); or "failed" with the failed run's message. Samples in
        ``.samples``.

    Raises
    ------
    ValueError
        Bad input (a ratio species not in the model, a bad option), before any run.

    Examples
    --------
    >>> import exosieve
    >>> from exosieve import constants as c
    >>> planet = exosieve.Planet(0.8 * c.M_EARTH, 0.9 * c.R_EARTH)  # an invented planet
    >>> exo = exosieve.PrescribedExobase(0.9 * c.R_EARTH + 4e5, 900.0, {"H": 1e11, "D": 1.5e7})
    >>> inv = exosieve.invert_ratio(planet, exo, {"H": 1e42, "D": 1.5e38}, (0.0, 4 * c.GYR),
    ...                             ratio="D/H", measured=3.0, relative=True)
    >>> inv.status, round(inv.ratio_reached / inv.initial_ratio, 6)
    ('solved', 3.0)
    """
    numerator, denominator = _ratio(ratio)
    value, width, lognormal = _measurement(measured, sigma, lnsigma, relative)
    search = _search_options(
        scaled, inventory_min, inventory_max, search_factor, tolerance, max_runs
    )
    run = _sampling(samples, seed, threads, progress_every)
    progress = _progress(progress)
    config = _build_config(
        planet,
        exobase,
        inventory,
        t_span,
        rtol=rtol,
        atol=atol,
        depletion_fraction=depletion_fraction,
        sources=sources,
        given_losses=given_losses,
        hydrodynamic=hydrodynamic,
        thresholds=thresholds,
        tail_depletion=tail_depletion,
        max_steps=max_steps,
        exobase_temperature=exobase_temperature,
        limit_by_diffusion=limit_by_diffusion,
        stepper=stepper,
        isotope_ratios=[],  # the core reports the measured ratio alone
    )
    raw = _core.invert_samples(
        config=config,
        numerator=numerator,
        denominator=denominator,
        value=value,
        width=width,
        lognormal=lognormal,
        relative=bool(relative),
        on_progress=progress,
        progress_interval_ms=100,
        **search,
        **run,
    )
    return _result(raw, (numerator, denominator), value, width, lognormal, relative, run["samples"])


def invert_case(
    cases: Any,
    case: str | int | None = None,
    *,
    ratio: str | tuple[str, str],
    measured: float,
    sigma: float = 0.0,
    lnsigma: float | None = None,
    relative: bool = False,
    scaled: Sequence[str] | None = None,
    inventory_min: float | None = None,
    inventory_max: float | None = None,
    search_factor: float = 1e10,
    tolerance: float = 1e-9,
    max_runs: int = 200,
    samples: int = 0,
    seed: int = 0,
    threads: int | None = None,
    progress: Callable[[int, int], Any] | None = None,
    progress_every: int | None = None,
    t_start: float = 10.0 * c.MYR,
    t_end: float = 4.5 * c.GYR,
    rtol: float = 1e-8,
    max_steps: int = 100_000,
    depletion_fraction: float = 1e-3,
    thresholds: Any = (6.0, 3.0, 2.1),
) -> RatioInversion:
    """The initial inventory of a case-table row that gives a measured isotope ratio at its end.

    The row is run as :func:`exosieve.compare` runs it (its ``age_end`` or ``star_age`` is the
    time of the measurement); its inventories set the nominal total of the scaled species and
    their proportions (the initial ratio). Monte Carlo sample ``j`` draws every stated
    uncertainty of the row (``_sigma`` and ``_lnsigma`` columns) exactly as sample ``j`` of
    :func:`exosieve.compare` with the same seed does, and the measured ratio from a stream of
    its own.

    Parameters
    ----------
    cases : str, Path, pandas.DataFrame, astropy Table or CaseTable
        The case table (see :func:`exosieve.compare`).
    case : str or int, optional
        The row: its ``case`` name, or its index (0-based, the ``case`` key of a sweep). May be
        left out for a table of one row.
    ratio, measured, sigma, lnsigma, relative, scaled, inventory_min, inventory_max, \
search_factor, tolerance, max_runs, samples, seed, threads, progress, progress_every
        As for :func:`invert_ratio`.
    t_start, t_end : float, optional
        Ages [s] for rows without ``age_start`` / without ``age_end`` or ``star_age``
        (defaults 10 Myr and 4.5 Gyr, as :func:`exosieve.compare`).
    rtol : float, optional
        Relative tolerance of each run for rows without an ``rtol`` column [1]; default 1e-8.
    max_steps, depletion_fraction, thresholds
        As for :func:`exosieve.compare`.

    Returns
    -------
    RatioInversion

    Raises
    ------
    ValueError
        For an unknown case, a malformed row (naming row and column), a ratio species the row
        lacks or a bad option, before any run.
    """
    numerator, denominator = _ratio(ratio)
    value, width, lognormal = _measurement(measured, sigma, lnsigma, relative)
    search = _search_options(
        scaled, inventory_min, inventory_max, search_factor, tolerance, max_runs
    )
    run = _sampling(samples, seed, threads, progress_every)
    progress = _progress(progress)
    table = load_cases(cases)
    row = _row(table.names, case)
    options = _core.BatchOptions(
        species=list(table.species),
        times=np.asarray([], dtype=float),
        t_start=real_number(t_start, "t_start", "s"),
        t_end=real_number(t_end, "t_end", "s"),
        rtol=real_number(rtol, "rtol", "1"),
        max_steps=whole_number(max_steps, "max_steps", 1),
        depletion_fraction=real_number(depletion_fraction, "depletion_fraction", "1"),
        thresholds=as_thresholds(thresholds),
        samples=0,
        seed=run["seed"],
        threads=run["threads"],
        chunk_size=1,
    )
    raw = _core.invert_case(
        table=table.to_core(first_key=row, rows=slice(row, row + 1)),
        row=0,
        options=options,
        numerator=numerator,
        denominator=denominator,
        value=value,
        width=width,
        lognormal=lognormal,
        relative=bool(relative),
        on_progress=progress,
        progress_interval_ms=100,
        **search,
        **run,
    )
    return _result(raw, (numerator, denominator), value, width, lognormal, relative, run["samples"])


def _row(names: Sequence[str], case: str | int | None) -> int:
    """Index of ``case`` (name or 0-based index) among the table's ``names``."""
    if case is None:
        if len(names) != 1:
            raise ValueError(
                f"case: the table has {len(names)} rows; name one (its case name or 0-based index)"
            )
        return 0
    if isinstance(case, (bool, np.bool_)):
        raise ValueError(f"case must be a case name or a row index, got {case!r}")
    if isinstance(case, str):
        matches = [i for i, name in enumerate(names) if name == case]
        if len(matches) == 1:
            return matches[0]
        if len(matches) > 1:
            raise ValueError(
                f"case: '{case}' names rows {matches} (0-based); give the row index instead"
            )
        shown = ", ".join(repr(n) for n in names[:8]) + (" ..." if len(names) > 8 else "")
        raise ValueError(f"case: no row is called '{case}' (cases: {shown})")
    if isinstance(case, (int, np.integer)):
        if not 0 <= int(case) < len(names):
            raise ValueError(f"case: row {case} is outside the table's rows 0..{len(names) - 1}")
        return int(case)
    raise ValueError(f"case must be a case name or a row index, got {case!r}")
