"""exosieve: thermal (Jeans) escape of planetary atmospheres over geological time.

SI units throughout: temperatures [K], masses [kg], lengths [m], densities [m^-3], times [s].
Astropy quantities are accepted where astropy is installed.
"""

from . import constants, results
from ._core import ExosieveError, FileError, InputError, NumericalError, __version__
from .batch import Comparison, Interrupted, compare, open_comparison
from .diffusion import (
    DiffusionPair,
    binary_diffusion_parameter,
    coupled_escape_flux,
    diffusion_limited_flux,
    diffusion_pairs,
)
from .evolution import evolve
from .jeans import (
    TailDepletion,
    escape_speed,
    jeans_energy_flux,
    jeans_escape_rate,
    jeans_flux,
    jeans_parameter,
    log_jeans_escape_rate,
    log_jeans_flux,
)
from .maxwell import (
    fraction_faster,
    log_fraction_faster,
    mean_speed,
    most_probable_speed,
    rms_speed,
    speed_pdf,
)
from .model import (
    REGIMES,
    EnergyLimitedEscape,
    Planet,
    PrescribedExobase,
    RegimeThresholds,
    Star,
    TabulatedSource,
    TabulatedTemperature,
    XuvTemperature,
    classify_regime,
    crossover_mass,
    dragged_flux,
    energy_limited_mass_loss,
    roche_lobe_factor,
    roche_lobe_ratio,
)
from .result import EvolutionResult, open_result
from .species import Species, register_species, species, species_names
from .thermosphere import (
    Exobase,
    ExobaseStatus,
    Thermosphere,
    ThermosphereSolutions,
    solve_thermospheres,
)

__all__ = [
    "__version__",
    "constants",
    "ExosieveError",
    "InputError",
    "NumericalError",
    "FileError",
    "results",
    "compare",
    "Comparison",
    "Interrupted",
    "open_comparison",
    "Species",
    "species",
    "species_names",
    "register_species",
    "TailDepletion",
    "most_probable_speed",
    "mean_speed",
    "rms_speed",
    "speed_pdf",
    "fraction_faster",
    "log_fraction_faster",
    "escape_speed",
    "jeans_parameter",
    "jeans_flux",
    "log_jeans_flux",
    "jeans_energy_flux",
    "jeans_escape_rate",
    "log_jeans_escape_rate",
    "Star",
    "Planet",
    "TabulatedTemperature",
    "XuvTemperature",
    "PrescribedExobase",
    "TabulatedSource",
    "EnergyLimitedEscape",
    "RegimeThresholds",
    "REGIMES",
    "classify_regime",
    "roche_lobe_ratio",
    "roche_lobe_factor",
    "energy_limited_mass_loss",
    "crossover_mass",
    "dragged_flux",
    "evolve",
    "EvolutionResult",
    "open_result",
    "binary_diffusion_parameter",
    "diffusion_limited_flux",
    "coupled_escape_flux",
    "diffusion_pairs",
    "DiffusionPair",
    "Thermosphere",
    "Exobase",
    "ExobaseStatus",
    "ThermosphereSolutions",
    "solve_thermospheres",
]
