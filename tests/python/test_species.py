"""Species data against reference libraries: masses against periodictable (IUPAC weights,
isotope masses), Lennard-Jones parameters against the chemicals package's copy of Poling,
Prausnitz & O'Connell (2001) Table B-1; thermal-diffusion factors (from memory)."""

import periodictable as pt
import pytest

import exosieve
from exosieve.constants import AMU

# Elements at IUPAC standard atomic weights (natural isotope mixtures). H and He are not: they
# are tracked beside D and 3He, so the table holds them as 1H and 4He (data/species.csv).
ELEMENTS = ["C", "N", "O", "Ne", "Ar", "Kr", "Xe"]


@pytest.mark.parametrize("name", ELEMENTS)
def test_element_masses_match_periodictable(name):
    # periodictable carries IUPAC standard atomic weights of an earlier release; the
    # revisions since then are below 3e-4 relative (argon: 39.948 -> 39.95).
    assert exosieve.species(name).mass_u == pytest.approx(pt.elements.symbol(name).mass, rel=3e-4)


@pytest.mark.parametrize(
    ("name", "reference"),
    [
        ("H", pt.H[1]),
        ("D", pt.D),
        ("He", pt.He[4]),
        ("3He", pt.He[3]),
        ("36Ar", pt.Ar[36]),
        ("38Ar", pt.Ar[38]),
        ("40Ar", pt.Ar[40]),
    ],
)
def test_isotope_masses_match_periodictable(name, reference):
    # Atomic mass evaluation values; periodictable's older evaluation agrees to 1e-8.
    assert exosieve.species(name).mass_u == pytest.approx(reference.mass, rel=1e-8)


def test_protium_mass_is_the_atomic_mass_evaluation_value():
    # AME2020 (Wang et al. 2021, Chinese Phys. C 45, 030003): m(1H) = 1.007 825 032 23(9) u, the
    # value CODATA 2018 adopts. The element's standard atomic weight (1.008) would count the
    # deuterium of natural hydrogen twice beside the species D.
    assert exosieve.species("H").mass_u == pytest.approx(1.00782503223, rel=1e-12)
    assert exosieve.species("H").mass_u != pytest.approx(pt.H.mass, rel=1e-5)


@pytest.mark.parametrize(
    ("name", "parts"),
    [("H2", [pt.H[1], pt.H[1]]), ("HD", [pt.H[1], pt.D])],
)
def test_hydrogen_isotopologues_are_sums_of_isotope_masses(name, parts):
    # periodictable isotope masses (atomic mass evaluation): H2 is 1H2 beside HD.
    assert exosieve.species(name).mass_u == pytest.approx(sum(p.mass for p in parts), rel=1e-8)


@pytest.mark.parametrize(
    ("name", "formula"),
    [
        ("CH4", "CH4"),
        ("NH3", "NH3"),
        ("H2O", "H2O"),
        ("N2", "N2"),
        ("O2", "O2"),
        ("CO", "CO"),
        ("CO2", "CO2"),
    ],
)
def test_molecular_masses_match_periodictable_formulas(name, formula):
    assert exosieve.species(name).mass_u == pytest.approx(pt.formula(formula).mass, rel=3e-4)


def test_mass_in_kg_is_mass_in_u_times_amu():
    s = exosieve.species("N2")
    assert s.mass == pytest.approx(s.mass_u * AMU, rel=1e-15)


def test_every_species_has_sources():
    for name in exosieve.species_names():
        s = exosieve.species(name)
        assert s.mass_source and s.lj_source and s.cross_section_source, name
        assert s.thermal_diffusion_source, name


def test_unknown_species_suggests_closest_names():
    with pytest.raises(ValueError, match=r"unknown species 'N3'.*closest names: .*N2"):
        exosieve.species("N3")


def test_user_species_register_and_validate():
    s = exosieve.register_species("Zz", mass=5.0 * AMU, cross_section=3e-19)
    assert exosieve.species("Zz").mass == s.mass
    with pytest.raises(ValueError, match="mass must be finite and > 0, got -1"):
        exosieve.register_species("Zz2", mass=-1.0)


# ---------------------------------------------------------------- Lennard-Jones parameters

# Poling, Prausnitz & O'Connell (2001) Table B-1 as tabulated in the chemicals package
# (chemicals.lennard_jones, method POLING = "Poling et al. (2001)"), looked up by CAS number.
POLING_CAS = {
    "He": "7440-59-7",
    "H2": "1333-74-0",
    "CH4": "74-82-8",
    "NH3": "7664-41-7",
    "H2O": "7732-18-5",
    "N2": "7727-37-9",
    "O2": "7782-44-7",
    "CO": "630-08-0",
    "CO2": "124-38-9",
    "Ne": "7440-01-9",
    "Ar": "7440-37-1",
    "Kr": "7439-90-9",
    "Xe": "7440-63-3",
}


@pytest.mark.parametrize(("name", "cas"), sorted(POLING_CAS.items()))
def test_lennard_jones_parameters_match_poling_table_b1(name, cas):
    from chemicals import lennard_jones as lj

    s = exosieve.species(name)
    sigma = lj.molecular_diameter(cas, method=lj.POLING)  # [Angstrom]
    eps = lj.Stockmayer(cas, method=lj.POLING)  # [K]
    assert s.lj_diameter == pytest.approx(sigma * 1e-10, rel=1e-12)
    assert s.lj_well_depth == pytest.approx(eps, rel=1e-12)
    assert "Poling" in s.lj_source and "from memory" not in s.lj_source


def test_atoms_are_not_in_table_b1_and_stay_from_memory():
    # Atomic H, C, N, O are not in Poling et al. Table B-1 (nor in the chemicals package's copy
    # of it): their values (Svehla 1962) are marked from memory.
    from chemicals import lennard_jones as lj

    table = lj.LJ_data_Poling  # indexed by CAS number
    assert all(cas in table.index for cas in POLING_CAS.values())
    for name, cas in [("H", "12385-13-6"), ("N", "17778-88-0"), ("O", "17778-80-2")]:
        assert cas not in table.index, name
        assert "from memory" in exosieve.species(name).lj_source, name
    assert "from memory" in exosieve.species("C").lj_source


def test_isotopes_share_the_parent_potential():
    for isotope, parent in [("D", "H"), ("3He", "He"), ("HD", "H2"), ("40Ar", "Ar")]:
        a, b = exosieve.species(isotope), exosieve.species(parent)
        assert (a.lj_diameter, a.lj_well_depth) == (b.lj_diameter, b.lj_well_depth)


# ---------------------------------------------------------------- thermal diffusion


@pytest.mark.parametrize(
    ("name", "alpha"), [("H", -0.25), ("D", -0.25), ("He", -0.38), ("3He", -0.38)]
)
def test_light_species_have_the_aeronomy_thermal_diffusion_factors(name, alpha):
    # from memory: Banks & Kockarts (1973, Aeronomy Part B) take alpha = -0.25 for H and -0.38
    # for He in d ln n/dr = -m g/(k T) - (1 + alpha) d ln T/dr; other compilations differ by a
    # few hundredths (-0.40 for He is also in use), hence the tolerance of 0.05. The isotopes
    # share their element's value (a light gas in a heavy one: the potential sets alpha).
    s = exosieve.species(name)
    assert s.thermal_diffusion_factor == pytest.approx(alpha, abs=0.05)
    assert s.thermal_diffusion_factor < 0  # pushed toward hot regions
    assert "from memory" in s.thermal_diffusion_source


def test_heavier_species_have_no_thermal_diffusion():
    for name in exosieve.species_names():
        if name not in ("H", "D", "He", "3He"):
            assert exosieve.species(name).thermal_diffusion_factor == 0.0, name
