#pragma once
//! \file hydrodynamic.hpp
//! Where the Jeans picture fails: regime classification by the Jeans parameter, energy-limited
//! hydrodynamic loss with the Roche-lobe correction, and drag of heavier species by the escaping
//! light one.

#include <cstddef>
#include <optional>
#include <string>
#include <vector>

#include "exosieve/arrays.hpp"

namespace exosieve {

//! Escape regime at the exobase, by the Jeans parameter of the bulk gas (Volkov et al. 2011).
enum class Regime : int {
    Jeans = 0,         //!< lambda > enhanced threshold: close to the Jeans rate
    EnhancedJeans = 1, //!< molecule-by-molecule escape, enhanced over the Jeans rate
    Transition = 2,    //!< transition from kinetic to hydrodynamic escape
    Hydrodynamic = 3,  //!< lambda <= hydrodynamic threshold: hydrodynamic outflow
};

//! Regime name: "jeans", "enhanced_jeans", "transition" or "hydrodynamic".
const char* regime_name(Regime regime);
//! The regime of that name (regime_name's inverse); InputError naming it if there is none.
Regime regime_named(const std::string& name);

//! Every regime, in code order (the order of REGIMES, of the files' `escape_regime` and flags).
inline constexpr Regime all_regimes[] = {Regime::Jeans, Regime::EnhancedJeans, Regime::Transition,
                                         Regime::Hydrodynamic};

//! Jeans-parameter thresholds between regimes [1]. Defaults: Volkov et al. (2011, ApJL 729,
//! L24), direct simulation Monte Carlo of a single-gas atmosphere: ~6, ~3 and ~2.1.
struct RegimeThresholds {
    double enhanced = 6.0;     //!< below this: enhanced (molecule-by-molecule) escape
    double transition = 3.0;   //!< below this: transition
    double hydrodynamic = 2.1; //!< at or below this: hydrodynamic outflow

    //! Throw InputError unless 0 < hydrodynamic < transition < enhanced, all finite.
    void validate() const;
};

//! Regime of Jeans parameter `lambda` [1]; each interval is open below, closed above.
Regime classify_regime(double lambda, const RegimeThresholds& thresholds = {});

//! Roche-lobe distance ratio xi = a (M_p / (3 M_star))^(1/3) / R_p [1] (Erkaev et al. 2007).
//! planet_mass, star_mass [kg]; semi_major_axis, radius [m].
double roche_lobe_ratio(double planet_mass, double star_mass, double semi_major_axis,
                        double radius);

//! Roche-lobe factor K(xi) = 1 - 3/(2 xi) + 1/(2 xi^3) [1] (Erkaev et al. 2007); xi > 1.
//! K -> 1 for a planet deep in its Roche lobe, K -> 0 as the lobe shrinks to the planet.
double roche_lobe_factor(double xi);

//! Energy-limited mass-loss rate [kg s^-1] (Watson et al. 1981; Erkaev et al. 2007):
//! dM/dt = eta pi R_p R_xuv^2 F_xuv / (G M_p K).
//! efficiency eta [1] in (0, 1]; radii [m]; xuv_flux [W m^-2]; planet_mass [kg]; K in (0, 1].
double energy_limited_mass_loss(double efficiency, double planet_radius, double xuv_radius,
                                double xuv_flux, double planet_mass, double roche_factor = 1.0);

//! Crossover mass [kg] of Hunten, Pepin & Walker (1987):
//! m_c = m_1 + k T F_1 / (b g x_1), with m_1 the escaping light species' mass [kg], T [K],
//! F_1 its flux [m^-2 s^-1], b the binary diffusion parameter of the heavy species in the light
//! one [m^-1 s^-1], g gravity [m s^-2] and x_1 the light species' mole fraction [1].
double crossover_mass(double light_mass, double temperature, double light_flux,
                      double diffusion_parameter, double gravity, double light_mole_fraction);

//! Flux of a heavier species dragged by the escaping light one [m^-2 s^-1] (Hunten, Pepin &
//! Walker 1987): F_i = (x_i/x_1) F_1 (m_c - m_i)/(m_c - m_1) for m_i < m_c, else 0.
double dragged_flux(double mass, double mole_fraction, double light_mass, double light_flux,
                    double light_mole_fraction, double crossover_mass);

//! Array forms of the four functions above: each argument has length 1 or `count`; results go
//! to `out` (length `count`). Every element is checked as the scalar form checks it, and an
//! InputError names the argument and the element, before any result is written.
void roche_lobe_ratio(ArrayArg planet_mass, ArrayArg star_mass, ArrayArg semi_major_axis,
                      ArrayArg radius, double* out, std::size_t count);
void energy_limited_mass_loss(ArrayArg efficiency, ArrayArg planet_radius, ArrayArg xuv_radius,
                              ArrayArg xuv_flux, ArrayArg planet_mass, ArrayArg roche_factor,
                              double* out, std::size_t count);
void crossover_mass(ArrayArg light_mass, ArrayArg temperature, ArrayArg light_flux,
                    ArrayArg diffusion_parameter, ArrayArg gravity, ArrayArg light_mole_fraction,
                    double* out, std::size_t count);
void dragged_flux(ArrayArg mass, ArrayArg mole_fraction, ArrayArg light_mass, ArrayArg light_flux,
                  ArrayArg light_mole_fraction, ArrayArg crossover_mass, double* out,
                  std::size_t count);

//! Binary diffusion parameter law b(T) = A (T / 1 K)^s [m^-1 s^-1] of one species in the
//! escaping light gas. A zero coefficient means "not dragged".
struct DiffusionLaw {
    double coefficient = 0.0; //!< A [m^-1 s^-1]
    double exponent = 0.0;    //!< s [1]
    //! b at temperature T [K].
    double operator()(double temperature) const;
};

//! Share an energy-limited mass-loss rate between the escaping light species and the species it
//! drags, conserving the mass rate (global rates, so the radius drops out:
//! Q_i = (x_i/x_1) max(0, Q_1 - q_i), q_i = 4 pi G M_p (m_i - m_1) b_i x_1 / (k T), and
//! sum_i m_i Q_i = dM/dt, piecewise linear in Q_1 and solved exactly).
//! mass, mole_fraction, diffusion_parameter b_i [m^-1 s^-1] (0: not dragged) have length n;
//! `escaping` indexes the light species; species lighter than it are not dragged.
//! Writes global escape rates [s^-1] to `rates` (length n).
void partition_mass_loss(double mass_loss, double temperature, double planet_mass,
                         std::size_t escaping, const double* mass, const double* mole_fraction,
                         const double* diffusion_parameter, std::size_t n, double* rates);

//! When the energy-limited option replaces Jeans escape.
//! The bulk regime is that of the densest species at the exobase; an exobase model with no
//! exobase (ExobaseState::outflow) counts as hydrodynamic.
enum class HydrodynamicActivation : int {
    Hydrodynamic = 0, //!< while the bulk regime is hydrodynamic
    Transition = 1,   //!< while the bulk regime is transition or hydrodynamic
    Always = 2,       //!< throughout the run
};

//! The radius where the XUV is absorbed, from an isothermal exponential atmosphere above the
//! planet radius (xuv_absorption_radius, outflow.hpp): r = R_p + H ln(sigma n0 H) for a vertical
//! optical depth of one, H = k T R_p^2 / (m G M_p) at the planet radius.
struct XuvAbsorption {
    double base_density = 0.0;        //!< n0 at the planet radius [m^-3] (> 0)
    double cross_section = 0.0;       //!< XUV absorption cross-section sigma [m^2] (> 0)
    double mean_molecular_mass = 0.0; //!< mean molecular mass of the absorbing gas [kg] (> 0)
    //! Temperature of the absorbing layer [K]; 0: the exobase temperature at each instant.
    double temperature = 0.0;
    bool chord = false; //!< optical depth one along a grazing chord instead of vertically

    //! Throw InputError for a value out of range.
    void validate() const;
};

//! Cap of the energy-limited rate by the recombination-limited rate (Murray-Clay, Chiang &
//! Murray 2009; recombination_limited_mass_loss, outflow.hpp).
struct RecombinationLimit {
    double temperature = 1e4;                      //!< wind temperature [K] (RecombinationDefaults)
    double recombination_coefficient = 2.59e-19;   //!< case B alpha_B [m^3 s^-1]
    double photon_energy = 20.0 * 1.602176634e-19; //!< mean ionising photon energy [J]

    //! Throw InputError for a value out of range.
    void validate() const;
};

//! Cap of the energy-limited (or XUV-driven) rate by the mass-loss rate of an isothermal
//! transonic (Parker) wind from a given base (parker_mass_loss, outflow.hpp; its assumptions:
//! steady, spherically symmetric, isothermal at `temperature`, one gas of constant mean
//! molecular mass, the planet's point-mass gravity alone).
//! The wind base is the planet radius: the evolving one with an envelope, the fixed one
//! otherwise (not the exobase, which a hydrodynamic outflow does not have). A base below the
//! sonic point starts on the subsonic branch; a base at or above it (base Jeans parameter
//! G M m / (k T R_p) <= 2) on the supersonic one.
//! The rate applied is min(energy-limited or XUV-driven, transonic). That is a modelling choice:
//! the wind cannot carry more mass than its base density and temperature supply, and the
//! absorbed XUV energy bounds what any wind can lift. The base density and temperature are
//! held fixed; nothing here couples them to the flux.
struct TransonicWind {
    double temperature = 0.0;  //!< wind temperature T [K] (> 0)
    double base_density = 0.0; //!< number density n0 at the wind base [m^-3] (> 0)
    //! Mean molecular mass of the wind m [kg] (> 0); 0: the escaping species' mass (the wind of
    //! the light gas that carries the loss).
    double mean_molecular_mass = 0.0;

    //! Throw InputError for a value out of range.
    void validate() const;
};

//! Options of energy-limited hydrodynamic escape with drag.
struct HydrodynamicOptions {
    double efficiency = 0.15;     //!< heating efficiency eta [1] (common practice: 0.1–0.3)
    double xuv_radius = 0.0;      //!< radius where XUV is absorbed [m]; 0 means the planet radius
    bool roche_lobe = true;       //!< apply the Roche-lobe factor K (needs the star and the orbit)
    std::string escaping_species; //!< the light escaping species; empty: the lightest present
    HydrodynamicActivation activation = HydrodynamicActivation::Hydrodynamic; //!< when it acts
    //! Drag heavier species: those listed in `diffusion` with their law, the others with the
    //! library's binary diffusion parameter in the light gas (measured fit, else Chapman–Enskog).
    bool drag = true;
    //! Diffusion law of dragged species in the light gas, by species name; a zero coefficient
    //! means that species is not dragged (it keeps its Jeans rate).
    std::vector<std::pair<std::string, DiffusionLaw>> diffusion;
    //! Absorb the XUV at the radius of optical depth one instead of `xuv_radius` (exclusive).
    std::optional<XuvAbsorption> absorption;
    //! Take the smaller of the energy-limited and the recombination-limited rate.
    std::optional<RecombinationLimit> recombination;
    //! Take the smaller of that rate and the transonic (Parker) wind's rate.
    std::optional<TransonicWind> transonic;

    //! Throw InputError for an efficiency outside (0, 1] or a negative radius or coefficient.
    void validate() const;
};

} // namespace exosieve
