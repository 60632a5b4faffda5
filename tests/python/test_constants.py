"""Constants against CODATA 2018 and IAU 2015 B3 as packaged by astropy and scipy."""

import pytest
from astropy.constants import codata2018, iau2015

from exosieve import constants as c


@pytest.mark.parametrize(
    ("ours", "reference"),
    [
        (c.G, codata2018.G),  # CODATA 2018 via astropy.constants.codata2018
        (c.K_B, codata2018.k_B),
        (c.AMU, codata2018.u),
        (c.N_A, codata2018.N_A),
        (c.GM_EARTH, iau2015.GM_earth),  # IAU 2015 B3 via astropy.constants.iau2015
        (c.R_EARTH, iau2015.R_earth),
        (c.GM_JUPITER, iau2015.GM_jup),
        (c.R_JUPITER, iau2015.R_jup),
        (c.GM_SUN, iau2015.GM_sun),
        (c.R_SUN, iau2015.R_sun),
        (c.L_SUN, iau2015.L_sun),
        (c.AU, iau2015.au),  # IAU 2012 B2, as carried by astropy
    ],
)
def test_constants_equal_astropy(ours, reference):
    assert ours == reference.si.value


def test_derived_masses_match_astropy():
    # astropy derives its nominal masses the same way: GM (IAU 2015 B3) / G (CODATA 2018).
    assert c.M_EARTH == pytest.approx(iau2015.M_earth.si.value, rel=1e-15)
    assert c.M_JUPITER == pytest.approx(iau2015.M_jup.si.value, rel=1e-15)
    assert c.M_SUN == pytest.approx(iau2015.M_sun.si.value, rel=1e-15)


def test_against_scipy_constants():
    import scipy.constants as sc

    # scipy may carry a newer CODATA release; G, k and N_A did not change after 2018
    # and m_u moved by 1.4e-9 relative in CODATA 2022.
    assert c.G == pytest.approx(sc.G, rel=1e-12)
    assert c.K_B == sc.k
    assert c.N_A == sc.N_A
    assert c.AMU == pytest.approx(sc.atomic_mass, rel=5e-9)
    assert c.YEAR == sc.Julian_year
    assert c.AU == sc.astronomical_unit
