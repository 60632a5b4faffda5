#pragma once
//! \file species.hpp
//! Gas species properties and the registry loaded from data/species.csv.

#include <deque>
#include <map>
#include <memory>
#include <shared_mutex>
#include <string>
#include <vector>

namespace exosieve {

//! Properties of one gas species (isotopes and isotopologues are species of their own).
//! The thermal-diffusion factor follows the aeronomy convention (DESIGN 3.3): in diffusive
//! equilibrium d ln n/dr = -m g/(k T) - (1 + alpha) d ln T/dr, so alpha < 0 pushes the species
//! toward hot regions (light gases in a heavy background: H -0.25, He -0.38).
struct Species {
    std::string name;                      //!< registry key, e.g. "H2", "36Ar"
    double mass = 0.0;                     //!< particle mass [kg]
    double lj_diameter = 0.0;              //!< Lennard-Jones collision diameter sigma [m]
    double lj_well_depth = 0.0;            //!< Lennard-Jones well depth eps/k_B [K]
    double cross_section = 0.0;            //!< collision cross-section for the mean free path [m^2]
    double thermal_diffusion_factor = 0.0; //!< alpha in the diffusive-equilibrium equation [1]
    std::string mass_source;               //!< where the mass comes from
    std::string lj_source;                 //!< where the Lennard-Jones parameters come from
    std::string cross_section_source;      //!< where the cross-section comes from
    std::string thermal_diffusion_source;  //!< where the thermal-diffusion factor comes from

    //! Mass in unified atomic mass units [u].
    double mass_u() const;
};

//! Throw InputError unless the species' numbers are physical (mass > 0 and so on).
void validate(const Species& s);

//! Name -> Species registry; unknown names raise InputError suggesting the closest names.
//! Safe to read from many threads while another adds species: a reference from get() stays
//! valid as long as the registry (a replaced species is kept, not overwritten).
class SpeciesRegistry {
  public:
    //! Parse a registry from CSV text with the columns of data/species.csv.
    static SpeciesRegistry from_csv(const std::string& csv_text, const std::string& origin);

    //! The species called `name`; InputError with suggestions when unknown.
    const Species& get(const std::string& name) const;
    //! True when `name` is registered.
    bool contains(const std::string& name) const;
    //! Add or replace a species (validated first).
    void add(const Species& s);
    //! All names, sorted.
    std::vector<std::string> names() const;
    //! Up to `count` registered names closest to `name` (edit distance, case-insensitive).
    std::vector<std::string> closest(const std::string& name, std::size_t count = 3) const;

  private:
    std::map<std::string, const Species*> by_name_;
    std::deque<Species> entries_; // every species ever added; a deque keeps them in place
    std::unique_ptr<std::shared_mutex> lock_ = std::make_unique<std::shared_mutex>();
};

//! The process-wide registry, built from the species table compiled into the library.
SpeciesRegistry& default_registry();

//! Shorthand for default_registry().get(name).
const Species& species(const std::string& name);

//! The text of data/species.csv as compiled into the library.
const char* species_table_csv();

} // namespace exosieve
