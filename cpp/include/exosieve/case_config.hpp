#pragma once
//! \file case_config.hpp
//! One case of a case table turned into the EvolutionConfig of its run, as Python's evolve()
//! builds it from the same quantities.

#include "exosieve/batch_options.hpp"
#include "exosieve/case_table.hpp"
#include "exosieve/evolution.hpp"

namespace exosieve {

//! The evolution config of a case (parameters as given; no sampling). Throws InputError naming
//! the parameter for missing or out-of-range values. The upper atmosphere is either a
//! PrescribedExobase (exobase_altitude, exobase_density) or, when homopause_altitude or
//! homopause_density is given, a ThermosphereExobase built as evolve() builds it from a
//! Thermosphere: x_i the homopause fractions, isothermal or (homopause_temperature,
//! bates_shape) Bates, diffusion_limited (default 1) and diffusion_source; giving both kinds
//! is refused. An envelope (core_mass, envelope_fraction, instead of planet_mass and
//! planet_radius) becomes EvolutionConfig::envelope, the planet at the start being the core
//! and its envelope at the start age. Exobase densities and shares of a total
//! inventory both use the mole fractions divided by their sum (a sample's drawn fractions are
//! renormalised this way).
//! heating_efficiency switches on energy-limited loss (HydrodynamicOptions, the Roche-lobe
//! factor with a star), with the XUV absorbed at the radius of optical depth one when
//! xuv_absorption_cross_section is given (XuvAbsorption: xuv_absorption_base_density,
//! xuv_absorption_temperature or the exobase temperature, xuv_absorption_molecular_mass or the
//! bulk gas's mean, xuv_absorption_chord) and capped by the recombination-limited rate when
//! recombination_limit is 1 (RecombinationLimit, its defaults or the recombination_ columns).
//! given_loss_<species> gives that species a GivenLoss: constant, or with
//! given_loss_exponent_<species> the XUV power law L_ref (F_xuv/given_loss_reference_flux)^p;
//! species without one get GivenLoss() (none), and a row with none leaves given_losses empty.
EvolutionConfig build_config(const CaseSpec& spec, const BatchOptions& options);

} // namespace exosieve
