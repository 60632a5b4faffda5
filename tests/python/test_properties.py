"""Property tests (hypothesis) of the kernel."""

import numpy as np
from hypothesis import given, settings
from hypothesis import strategies as st

import exosieve
from exosieve.constants import AMU, M_EARTH, R_EARTH

temperatures = st.floats(min_value=10.0, max_value=1e5)
masses = st.floats(min_value=1.0, max_value=300.0).map(lambda u: u * AMU)
speeds = st.lists(st.floats(min_value=0.0, max_value=1e6), min_size=2, max_size=30)


@settings(max_examples=200, deadline=None)
@given(speeds, temperatures, masses)
def test_tail_fraction_in_unit_interval_and_falls_with_speed(v, temperature, mass):
    v = np.sort(np.array(v))
    f = exosieve.fraction_faster(v, temperature, mass)
    assert np.all((f >= 0.0) & (f <= 1.0))
    # Falls with speed, to rounding: near v = 0 the fraction is 1 - O(x^3) and neighbouring
    # values may differ by one unit in the last place either way.
    assert np.all(np.diff(f) <= np.spacing(f[:-1]))


@settings(max_examples=200, deadline=None)
@given(
    st.floats(min_value=1e3, max_value=1e20),
    temperatures,
    temperatures,
    masses,
    st.floats(min_value=1.0, max_value=3.0),
)
def test_flux_rises_with_temperature_at_fixed_density(n, t1, t2, mass, radius_factor):
    low, high = min(t1, t2), max(t1, t2)
    radius = radius_factor * R_EARTH
    f_low = exosieve.jeans_flux(n, low, mass, M_EARTH, radius)
    f_high = exosieve.jeans_flux(n, high, mass, M_EARTH, radius)
    assert np.isfinite(f_low) and np.isfinite(f_high)
    assert f_high >= f_low
    # The log form is strictly increasing even where the flux underflows.
    if high > low * (1 + 1e-9):
        assert exosieve.log_jeans_flux(n, high, mass, M_EARTH, radius) > exosieve.log_jeans_flux(
            n, low, mass, M_EARTH, radius
        )
