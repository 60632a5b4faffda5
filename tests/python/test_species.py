"""Species masses against the periodictable package (IUPAC weights, isotope masses)."""

import periodictable as pt
import pytest

import exosieve
from exosieve.constants import AMU

ELEMENTS = ["H", "He", "C", "N", "O", "Ne", "Ar", "Kr", "Xe"]


@pytest.mark.parametrize("name", ELEMENTS)
def test_element_masses_match_periodictable(name):
    # periodictable carries IUPAC standard atomic weights of an earlier release; the
    # revisions since then are below 3e-4 relative (argon: 39.948 -> 39.95).
    assert exosieve.species(name).mass_u == pytest.approx(pt.elements.symbol(name).mass, rel=3e-4)


@pytest.mark.parametrize(
    ("name", "reference"),
    [("D", pt.D), ("3He", pt.He[3]), ("36Ar", pt.Ar[36]), ("38Ar", pt.Ar[38]), ("40Ar", pt.Ar[40])],
)
def test_isotope_masses_match_periodictable(name, reference):
    # Atomic mass evaluation values; periodictable's older evaluation agrees to 1e-8.
    assert exosieve.species(name).mass_u == pytest.approx(reference.mass, rel=1e-8)


@pytest.mark.parametrize(
    ("name", "formula"),
    [
        ("H2", "H2"),
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


def test_hd_mass_is_sum_of_isotopes():
    # periodictable: H[1] + D (atomic mass evaluation).
    assert exosieve.species("HD").mass_u == pytest.approx(pt.H[1].mass + pt.D.mass, rel=1e-8)


def test_mass_in_kg_is_mass_in_u_times_amu():
    s = exosieve.species("N2")
    assert s.mass == pytest.approx(s.mass_u * AMU, rel=1e-15)


def test_every_species_has_sources():
    for name in exosieve.species_names():
        s = exosieve.species(name)
        assert s.mass_source and s.lj_source and s.cross_section_source, name


def test_unknown_species_suggests_closest_names():
    with pytest.raises(ValueError, match=r"unknown species 'N3'.*closest names: .*N2"):
        exosieve.species("N3")


def test_user_species_register_and_validate():
    s = exosieve.register_species("Zz", mass=5.0 * AMU, cross_section=3e-19)
    assert exosieve.species("Zz").mass == s.mass
    with pytest.raises(ValueError, match="mass must be finite and > 0, got -1"):
        exosieve.register_species("Zz2", mass=-1.0)
