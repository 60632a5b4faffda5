"""Loss of each species' inventory over time: :func:`evolve`.

``dN_i/dt = S_i(t) - Q_i(t, N)`` with ``Q_i`` the global escape rate from the exobase model
(Jeans escape, or energy-limited hydrodynamic loss with drag) and ``S_i`` a source. The C++
core integrates ``ln N_i`` with Boost.Odeint under step-size control (Dormand–Prince 5(4);
Rosenbrock 4(3) when sources make the problem stiff), with dense output at ``t_eval`` and
events located on the dense output (depletion by TOMS 748, regime changes by bisection). In
``ln N`` a species lost in 1e4 years beside one lasting 10 Gyr costs no extra steps, and
inventories far below 1e-308 of their start stay representable.

Sources (:class:`TabulatedSource`) and losses given by the user (:class:`GivenLoss`) enter the
same equation.
"""

from __future__ import annotations

import math
from collections.abc import Callable, Mapping, Sequence
from typing import Any

from numpy.typing import ArrayLike

from . import _core
from ._arrays import _finite, _finite_vector, _scalar, _vector, real_number, whole_number
from .envelope import Envelope
from .exobase_model import PrescribedExobase, temperature_history
from .hydrodynamic import EnergyLimitedEscape, as_thresholds
from .result import EvolutionResult
from .species import _name
from .stellar import Planet

__all__ = ["evolve", "TabulatedSource", "GivenLoss"]

ExobaseLike = Any  # PrescribedExobase or Thermosphere


class TabulatedSource:
    """A source (e.g. outgassing) against time [s^-1]: linear between points, held at the ends.

    Parameters
    ----------
    times : array_like
        Strictly increasing times [s].
    rates : array_like
        Source rates [particles s^-1] (>= 0).

    Examples
    --------
    >>> TabulatedSource([0.0, 1e16], [1e27, 0.0])(5e15)
    5e+26
    """

    def __init__(self, times: ArrayLike, rates: ArrayLike) -> None:
        self.times = _finite_vector(times, "times", "s")
        self.rates = _finite_vector(rates, "rates", "s-1")
        self._core = _core.SourceRate(self.times, self.rates)

    def __call__(self, t: float) -> float:
        """Rate [s^-1] at time ``t`` [s]."""
        return float(self._core(_finite(t, "t", "s")))

    def __repr__(self) -> str:
        return f"TabulatedSource(times={self.times!r}, rates={self.rates!r})"

    def __reduce__(self) -> tuple[Any, ...]:
        return (TabulatedSource, (self.times, self.rates))


def source_rate(value: Any, name: str) -> Any:
    """The core source for a float rate [s^-1], a TabulatedSource or a (times, rates) pair."""
    if isinstance(value, TabulatedSource):
        return value._core
    if isinstance(value, tuple) and len(value) == 2:
        return TabulatedSource(*value)._core
    rate = _scalar(value, f"source of {name}", "s-1")
    if not (math.isfinite(rate) and rate >= 0.0):
        raise ValueError(f"source of {name} must be finite and >= 0 [s^-1], got {rate!r}")
    return _core.SourceRate(rate)


class GivenLoss:
    """A loss of one species that the user gives [particles s^-1], beyond thermal escape.

    For non-thermal escape (photochemical escape, ion pick-up, sputtering), which exosieve does
    not model, or any loss measured or modelled elsewhere. :func:`exosieve.evolve` adds it to the
    thermal (Jeans or hydrodynamic) loss, ``dN/dt = S - Q - L``, and reports it apart, as
    ``result.given_loss_rate``. It does not vanish with the inventory, so a species with a given
    loss is held at its depletion level once it reaches it.

    Build one with ``GivenLoss(rate)`` (constant [s^-1]), :meth:`table` or :meth:`xuv_power_law`.

    Examples
    --------
    >>> GivenLoss(1e25)(0.0)
    1e+25
    >>> GivenLoss.table([0.0, 1e16], [1e26, 0.0])(5e15)
    5e+25
    >>> f"{GivenLoss.xuv_power_law(1e26, 1.0, 0.5)(0.0, xuv_flux=4.0):.6g}"
    '2e+26'
    """

    def __init__(self, rate: float) -> None:
        value = _finite(rate, "given loss rate", "s-1")
        if not value >= 0.0:
            raise ValueError(f"given loss rate must be >= 0 [s^-1], got {value!r}")
        self.kind = "constant"
        self.parameters: dict[str, Any] = {"rate": value}
        self._core = _core.GivenLoss(value)

    @classmethod
    def table(cls, times: ArrayLike, rates: ArrayLike) -> GivenLoss:
        """Rates [s^-1] (>= 0) against strictly increasing times [s], linear between points and
        held at the ends."""
        t = _finite_vector(times, "times", "s")
        r = _finite_vector(rates, "rates", "s-1")
        self = cls.__new__(cls)
        self.kind = "table"
        self.parameters = {"times": t, "rates": r}
        self._core = _core.GivenLoss(t, r)
        return self

    @classmethod
    def xuv_power_law(
        cls, reference_rate: float, reference_flux: float, exponent: float
    ) -> GivenLoss:
        """``L = reference_rate (F_xuv / reference_flux)^exponent``: reference_rate [s^-1]
        (>= 0) at reference_flux [W m^-2] (> 0), exponent [1]. Needs the planet's star."""
        rate = _finite(reference_rate, "reference_rate", "s-1")
        flux = _finite(reference_flux, "reference_flux", "W m-2")
        p = _finite(exponent, "exponent", "1")
        self = cls.__new__(cls)
        self.kind = "xuv_power_law"
        self.parameters = {"reference_rate": rate, "reference_flux": flux, "exponent": p}
        self._core = _core.GivenLoss.xuv_power_law(rate, flux, p)
        return self

    def __call__(self, t: float, xuv_flux: float = 0.0) -> float:
        """Rate [s^-1] at time ``t`` [s] and XUV flux ``xuv_flux`` [W m^-2] (power law only)."""
        return float(self._core(_finite(t, "t", "s"), _finite(xuv_flux, "xuv_flux", "W m-2")))

    def __repr__(self) -> str:
        args = ", ".join(f"{k}={v!r}" for k, v in self.parameters.items())
        return f"GivenLoss.{self.kind}({args})" if self.kind != "constant" else f"GivenLoss({args})"

    def __reduce__(self) -> tuple[Any, ...]:
        if self.kind == "constant":
            return (GivenLoss, (self.parameters["rate"],))
        return (getattr(GivenLoss, self.kind), tuple(self.parameters.values()))


def given_loss(value: Any, name: str) -> Any:
    """The core given loss for a float rate [s^-1], a GivenLoss or a (times, rates) pair."""
    if isinstance(value, GivenLoss):
        return value._core
    if isinstance(value, tuple) and len(value) == 2:
        return GivenLoss.table(*value)._core
    rate = _scalar(value, f"given loss of {name}", "s-1")
    if not (math.isfinite(rate) and rate >= 0.0):
        raise ValueError(f"given loss of {name} must be finite and >= 0 [s^-1], got {rate!r}")
    return _core.GivenLoss(rate)


def evolve(
    planet: Planet,
    exobase: ExobaseLike,
    inventory: Mapping[str, Any],
    t_span: Sequence[Any],
    t_eval: Any | None = None,
    rtol: float = 1e-8,
    atol: None | float | Mapping[str, float] = None,
    depletion_fraction: float = 1e-3,
    sources: Mapping[str, Any] | None = None,
    hydrodynamic: EnergyLimitedEscape | None = None,
    thresholds: Any = None,
    tail_depletion: Any = 1.0,
    isotope_ratios: Sequence[tuple[str, str]] | None = None,
    max_steps: int = 100_000,
    progress: Callable[[float], bool | None] | None = None,
    exobase_temperature: Any = None,
    limit_by_diffusion: bool = True,
    stepper: str = "auto",
    progress_every: int | None = None,
    given_losses: Mapping[str, Any] | None = None,
    envelope: Envelope | None = None,
) -> EvolutionResult:
    """Integrate the loss of each species' inventory over ``t_span``.

    Parameters
    ----------
    planet : Planet
        The planet (with its star and orbit for anything XUV-driven).
    exobase : PrescribedExobase or Thermosphere
        Exobase radius, densities and temperature history. A :class:`Thermosphere` (isothermal
        or Bates profile) is re-solved at every instant: its homopause mole fractions follow
        the inventories, ``x_i ∝ x_i0 N_i/N_i0`` (homopause radius and density held), and its
        exobase temperature follows ``exobase_temperature``.
    inventory : mapping of str to float
        Initial number of particles of each species [1] (> 0). Its order sets the species order
        of the result.
    t_span : (float, float)
        Start and end times [s]: stellar ages when anything is XUV-driven.
    t_eval : array_like, optional
        Strictly increasing output times [s] inside ``t_span``, interpolated with the
        integrator's dense output; default: the end of every step.
    rtol : float, optional
        Relative tolerance on each inventory [1] (default 1e-8).
    atol : float or mapping of str to float, optional
        Absolute tolerance on the inventories [particles]; default
        ``rtol * depletion_fraction * N_i(t_start)`` for each species, so that depletion times
        are located to about ``rtol``.
    depletion_fraction : float, optional
        A species is depleted when its inventory falls below this share of its start
        (default 1e-3); the time is located on the dense output (TOMS 748).
    sources : mapping of str to float, TabulatedSource or (times, rates), optional
        Source of each named species [s^-1].
    given_losses : mapping of str to float, GivenLoss or (times, rates), optional
        Loss of each named species given by the user [particles s^-1], beyond thermal escape:
        non-thermal (photochemical escape, ion pick-up, sputtering; not modelled by exosieve)
        or external. A constant, a :class:`GivenLoss` (constant, table against time, or power
        law in the XUV flux) or a ``(times, rates)`` table. Added to the thermal loss and
        reported apart in ``result.given_loss_rate`` (``escape_rate`` stays thermal). A species
        with a given loss is held at its depletion level once it reaches it (the loss does not
        vanish with the inventory, which would reach zero in a finite time).
    hydrodynamic : EnergyLimitedEscape, optional
        Energy-limited hydrodynamic escape with drag of heavier species. It also takes over
        while an evolving :class:`Thermosphere` has no exobase (collisional out to its outer
        radius); without it such a run raises NumericalError saying why.
    thresholds : RegimeThresholds or (float, float, float), optional
        Jeans-parameter thresholds between regimes (enhanced, transition, hydrodynamic) [1]
        (Volkov et al. 2011 defaults).
    tail_depletion : float, tuple or TailDepletion, optional
        Factor on every Jeans flux (default 1), at most 1 unless given as
        ``TailDepletion(factor, enhancement=True)``.
    isotope_ratios : sequence of (str, str), optional
        (numerator, denominator) pairs to report; default the known pairs present among the
        species (D/H, HD/H2, 3He/He, 36Ar/38Ar, 40Ar/36Ar).
    max_steps : int, optional
        Steps (accepted and rejected) before the run gives up with NumericalError.
    progress : callable, optional
        Called as ``progress(t)`` with the time reached [s], about every 50 ms (or as
        ``progress_every`` says); returning False stops the run early (the result then has
        ``completed`` False). Ctrl-C stops a run with KeyboardInterrupt: signals are checked
        at the same moments, with or without ``progress``.
    exobase_temperature : float, TabulatedTemperature, XuvTemperature or callable, optional
        For a Thermosphere: the exobase temperature history [K] (default: its own exobase
        temperature, held). A PrescribedExobase carries its own.
    limit_by_diffusion : bool, optional
        For a Thermosphere: couple Jeans escape to diffusion through the heterosphere
        (default True).
    stepper : {"auto", "dopri5", "rosenbrock4"}, optional
        Odeint stepper for ``ln N``: the explicit Dormand–Prince 5(4) pair (fastest for losses,
        however fast), or the linearly implicit Rosenbrock 4(3) (Jacobian by finite
        differences) for stiff balances, e.g. a source holding a fast-escaping species in
        steady state, where the explicit pair is held to steps of the relaxation time.
        ``"auto"`` (default) takes Rosenbrock 4(3) when any species has a source.
    progress_every : int, optional
        Call ``progress`` (and check for Ctrl-C) after every this many accepted steps [steps]
        instead of about every 50 ms: a schedule set by the step count alone, the same on any
        machine (e.g. to stop a run after a given number of steps, or in tests).
    envelope : Envelope, optional
        An H/He envelope on a rock/iron core (core mass [kg], envelope fraction [1], opacity),
        integrated with the inventories: its mass is lost at the ``hydrodynamic`` option's
        mass-loss rate while energy-limited loss acts, and the planet's mass
        ``M_core + M_env`` [kg] and radius ``R_core + R_env`` [m] (Lopez & Fortney 2014 fit at
        the planet's bolometric flux and the stellar age) follow it at every instant. They
        enter the energy-limited rate (XUV absorbed at the evolving radius unless
        ``xuv_radius`` or ``absorption`` is given; the Roche-lobe factor), the Jeans
        parameters (the planet mass) and the exobase, which keeps its height above the
        planet. An event locates the stellar age the envelope is gone
        (``result.stripping_time``); the planet is the bare core after it. Needs the planet's
        star and orbit, ``hydrodynamic`` (without the recombination limit) and a
        :class:`PrescribedExobase` above the planet at the start; ``planet``'s own mass and
        radius are not used. The result gains ``envelope_mass`` [kg], ``planet_radius`` [m]
        and ``envelope_loss_rate`` [kg s^-1] per output time.

    Returns
    -------
    EvolutionResult

    Raises
    ------
    ValueError
        Bad input, before any step (a negative inventory, ``t_eval`` outside ``t_span``, ...).
    exosieve.NumericalError
        When the run cannot make progress; the message says where and why.

    Examples
    --------
    >>> import exosieve
    >>> from exosieve import constants as c
    >>> planet = exosieve.Planet(c.M_EARTH, c.R_EARTH)
    >>> exo = exosieve.PrescribedExobase(c.R_EARTH + 500e3, 1000.0, {"H": 1e11, "D": 1e7})
    >>> r = exosieve.evolve(planet, exo, {"H": 1e38, "D": 1e34}, (0.0, 4 * c.GYR))
    >>> bool(r.isotope_ratio["D/H"][-1] > r.isotope_ratio["D/H"][0])
    True
    """
    if progress_every is not None:
        progress_every = whole_number(progress_every, "progress_every", 1, " [steps]")
    if progress is not None and not callable(progress):
        raise ValueError(f"progress must be a callable progress(t) or None, got {progress!r}")
    config = _build_config(
        planet,
        exobase,
        inventory,
        t_span,
        t_eval=t_eval,
        rtol=rtol,
        atol=atol,
        depletion_fraction=depletion_fraction,
        sources=sources,
        hydrodynamic=hydrodynamic,
        thresholds=thresholds,
        tail_depletion=tail_depletion,
        isotope_ratios=isotope_ratios,
        max_steps=max_steps,
        exobase_temperature=exobase_temperature,
        limit_by_diffusion=limit_by_diffusion,
        stepper=stepper,
        given_losses=given_losses,
        envelope=envelope,
    )
    raw = _core.evolve(config, progress, int(progress_every or 0))
    return EvolutionResult._from_core(raw)


def _build_config(
    planet: Planet,
    exobase: ExobaseLike,
    inventory: Mapping[str, Any],
    t_span: Sequence[Any],
    *,
    t_eval: Any | None = None,
    rtol: float = 1e-8,
    atol: None | float | Mapping[str, float] = None,
    depletion_fraction: float = 1e-3,
    sources: Mapping[str, Any] | None = None,
    hydrodynamic: EnergyLimitedEscape | None = None,
    thresholds: Any = None,
    tail_depletion: Any = 1.0,
    isotope_ratios: Sequence[tuple[str, str]] | None = None,
    max_steps: int = 100_000,
    exobase_temperature: Any = None,
    limit_by_diffusion: bool = True,
    stepper: str = "auto",
    given_losses: Mapping[str, Any] | None = None,
    envelope: Envelope | None = None,
) -> Any:
    """The core EvolutionConfig of :func:`evolve`'s arguments (checked)."""
    from .jeans import _tail

    if not isinstance(planet, Planet):
        raise ValueError(f"planet must be an exosieve.Planet, got {planet!r}")
    if not isinstance(inventory, Mapping) or not inventory:
        raise ValueError(
            f"inventory must be a non-empty mapping of species to particle "
            f"numbers, got {inventory!r}"
        )
    names = [_name(k) for k in inventory]
    species_objects = [k if isinstance(k, _core.Species) else _core.species(k) for k in inventory]
    values = zip(names, inventory.values(), strict=True)
    initial = [_scalar(v, f"inventory of {n}", "1") for n, v in values]

    config = _core.EvolutionConfig(planet._core)
    config.species = species_objects
    config.initial_inventory = initial
    config.exobase, config.temperature = _exobase_model(
        exobase, names, exobase_temperature, limit_by_diffusion
    )
    span = _vector(t_span, "t_span", "s")
    if span.shape != (2,):
        raise ValueError(f"t_span must be (start, end) [s], got {t_span!r}")
    config.t_start, config.t_end = float(span[0]), float(span[1])
    if t_eval is not None:
        times = _vector(t_eval, "t_eval", "s")
        if times.size == 0:
            raise ValueError("t_eval must hold at least one time")
        config.t_eval = times
    config.rtol = real_number(rtol, "rtol", "1")
    if atol is not None:
        if isinstance(atol, Mapping):
            unknown = [k for k in atol if k not in names]
            if unknown or len(atol) != len(names):
                raise ValueError(
                    f"atol must give one value per species ({', '.join(names)}), got {dict(atol)!r}"
                )
            config.atol = [_scalar(atol[n], f"atol of {n}", "1") for n in names]
        else:
            config.atol = [_scalar(atol, "atol", "1")] * len(names)
    config.depletion_fraction = real_number(depletion_fraction, "depletion_fraction", "1")
    if isinstance(max_steps, float) and float(max_steps).is_integer():
        max_steps = int(max_steps)  # e.g. 1e5
    config.max_steps = whole_number(max_steps, "max_steps", 1)
    if not isinstance(stepper, str) or stepper not in _core.StepperKind.__members__:
        raise ValueError(f"stepper must be 'auto', 'dopri5' or 'rosenbrock4', got {stepper!r}")
    config.stepper = getattr(_core.StepperKind, stepper)
    if sources:
        unknown = [_name(k) for k in sources if _name(k) not in names]
        if unknown:
            raise ValueError(f"sources: {', '.join(unknown)} not in the inventory")
        by_name = {_name(k): v for k, v in sources.items()}
        config.sources = [
            source_rate(by_name[n], n) if n in by_name else _core.SourceRate() for n in names
        ]
    if given_losses:
        unknown = [_name(k) for k in given_losses if _name(k) not in names]
        if unknown:
            raise ValueError(f"given_losses: {', '.join(unknown)} not in the inventory")
        given = {_name(k): v for k, v in given_losses.items()}
        config.given_losses = [
            given_loss(given[n], n) if n in given else _core.GivenLoss() for n in names
        ]
    if hydrodynamic is not None:
        if not isinstance(hydrodynamic, EnergyLimitedEscape):
            raise ValueError(
                f"hydrodynamic must be an exosieve.EnergyLimitedEscape, got {hydrodynamic!r}"
            )
        config.hydrodynamic = hydrodynamic._core
    if envelope is not None:
        if not isinstance(envelope, Envelope):
            raise ValueError(f"envelope must be an exosieve.Envelope, got {envelope!r}")
        config.envelope = envelope._core
    if thresholds is not None:
        config.thresholds = as_thresholds(thresholds)
    config.tail = _tail(tail_depletion)
    if isotope_ratios is None:
        config.isotope_ratios = _core.default_isotope_ratios(names)
    else:
        config.isotope_ratios = [(str(a), str(b)) for a, b in isotope_ratios]
    return config


def _exobase_model(
    exobase: Any, names: list[str], temperature: Any, limit_by_diffusion: bool
) -> tuple[Any, Any]:
    """The core exobase model and temperature history for ``exobase``."""
    from .jeans import _tail
    from .thermosphere import Thermosphere

    if isinstance(exobase, PrescribedExobase):
        if temperature is not None:
            raise ValueError(
                "exobase_temperature is for a Thermosphere; a PrescribedExobase "
                "carries its own temperature"
            )
        return exobase._core_model(names), exobase._history
    if isinstance(exobase, Thermosphere):
        kwargs = exobase._kwargs
        model = _core.ThermosphereExobase(
            exobase._core,
            names,
            bool(limit_by_diffusion),
            kwargs["diffusion_method"],
            _tail(kwargs["tail_depletion"]),
        )
        if temperature is None:
            temperature = exobase._args[4]
            if temperature is None:
                raise ValueError(
                    "exobase_temperature is required for a thermosphere given "
                    "by a temperature table"
                )
        return model, temperature_history(temperature)
    raise ValueError(
        f"exobase must be an exosieve.PrescribedExobase or exosieve.Thermosphere, got {exobase!r}"
    )
