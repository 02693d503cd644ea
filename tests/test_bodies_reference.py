"""Body profiles against published constants and a general-purpose reference library.

Sources: NIMA TR8350.2 3rd ed. (WGS-84 and the EGM96 C20bar, confirmed); JPL DE440
lunar and Mars-system GM (confirmed second-hand); astropy.constants (IAU 2015
nominal values, which are *not* WGS-84).
"""

import math

import pytest

from console.profiles import load_body
from mechanics.bodies import MODELS, Body, check_model

KM3_S2 = 1e9  # km^3/s^2 -> m^3/s^2


@pytest.fixture(scope="module")
def earth():
    return load_body("earth")


def test_earth_is_wgs84(earth):
    # NIMA TR8350.2 (3rd ed., 2000): GM 3.986004418e14 m^3/s^2, a 6378137 m,
    # omega 7.292115e-5 rad/s; EGM96 C20bar -0.484166774985e-3, J2 = -sqrt(5) C20bar.
    assert earth.name == "earth"
    assert earth.mu_m3_s2 == pytest.approx(3.986004418e14, rel=1e-15)
    assert earth.radius_m == pytest.approx(6378137.0, abs=1e-6)
    assert earth.rotation_rad_s == pytest.approx(7.292115e-5, rel=1e-15)
    assert earth.j2 == pytest.approx(-math.sqrt(5.0) * -0.484166774985e-3, rel=1e-10)
    assert earth.default_model == "two-body+J2"


def test_earth_against_astropy(earth):
    # astropy's GM_earth and R_earth are the IAU 2015 Resolution B3 *nominal* values
    # (3.986004e14 m^3/s^2, 6378100 m), not WGS-84: they differ from WGS-84 by 1.05e-7
    # relative and 37 m.  Hence the tolerances: GM within 1e-6 relative, radius within 50 m.
    # This catches a wrong unit, a km/m slip or a different body, not the last digits.
    from astropy import constants as ac

    assert "IAU 2015" in ac.GM_earth.reference
    assert "IAU 2015" in ac.R_earth.reference
    assert earth.mu_m3_s2 == pytest.approx(ac.GM_earth.to_value("m3 / s2"), rel=1e-6)
    assert earth.radius_m == pytest.approx(ac.R_earth.to_value("m"), abs=50.0)


def test_moon_gm_is_de440():
    # JPL DE440 lunar GM 4902.800118 km^3/s^2 (confirmed second-hand).
    moon = load_body("moon")
    assert moon.mu_m3_s2 == pytest.approx(4902.800118 * KM3_S2, rel=1e-12)
    # mean radius 1737.151 km, Wieczorek (2015), Treatise on Geophysics 10.5 (from memory)
    assert moon.radius_m == pytest.approx(1737.151e3, abs=1e-3)
    assert moon.default_model == "two-body+J2"


def test_mars_gm_close_to_de440_system():
    # The profile carries the Mars *body* GM (its named source: JPL Horizons); DE440 gives the
    # Mars *system* GM 42828.375816 km^3/s^2 (confirmed second-hand), which also
    # holds Phobos and Deimos.  Those differ by a few parts in 1e8, so 1e-7 relative checks the
    # transcription (units, digits), not which of the two it is.
    mars = load_body("mars")
    assert mars.mu_m3_s2 == pytest.approx(42828.375816 * KM3_S2, rel=1e-7)
    assert mars.mu_m3_s2 != 42828.375816 * KM3_S2  # it is the body value, as its source says


@pytest.mark.parametrize("name, g_surface, period_s", [
    # Surface gravity (common practice, from memory): Earth 9.80 at the equator without rotation,
    # Moon 1.62, Mars 3.72 m/s^2; tolerance 1 %.  Sidereal rotation (from memory): Earth
    # 86164.1 s, Moon 27.32 d, Mars 24.623 h.
    ("earth", 9.80, 86164.1),
    ("moon", 1.62, 27.32 * 86400.0),
    ("mars", 3.72, 24.623 * 3600.0),
])
def test_profiles_physically_plausible(name, g_surface, period_s):
    b = load_body(name)
    assert b.mu_m3_s2 / b.radius_m**2 == pytest.approx(g_surface, rel=0.01)
    assert 2.0 * math.pi / b.rotation_rad_s == pytest.approx(period_s, rel=1e-3)
    assert 0.0 < b.j2 < 0.01
    assert 0.0 < b.min_safe_alt_m < 1e6


def test_earth_sidereal_day_to_the_tenth_of_a_second(earth):
    # 23 h 56 min 4.1 s (from memory) = 86164.1 s; the WGS-84 rate gives 86164.099 s.
    assert 2.0 * math.pi / earth.rotation_rad_s == pytest.approx(86164.1, abs=0.05)


def test_unknown_profile_names_the_known_ones():
    with pytest.raises(ValueError, match="no body profile named 'pluto'.*earth.*mars.*moon"):
        load_body("pluto")


@pytest.mark.parametrize("kwargs, match", [
    (dict(mu_m3_s2=-1.0, radius_m=1e6), "mu_m3_s2 must be a positive finite number"),
    (dict(mu_m3_s2=1e14, radius_m=0.0), "radius_m must be a positive finite number"),
    (dict(mu_m3_s2=1e14, radius_m=1e6, j2=0.5), "not a plausible oblateness"),
    (dict(mu_m3_s2=1e14, radius_m=1e6, rotation_rad_s=float("nan")),
     "rotation_rad_s must be finite"),
])
def test_body_refusals(kwargs, match):
    with pytest.raises(ValueError, match=match):
        Body("test", **kwargs)


def test_force_models(earth):
    assert MODELS == ("two-body", "two-body+J2")
    assert check_model("two-body", earth) == "two-body"
    assert check_model("two-body+J2", earth) == "two-body+J2"
    flat = Body("flat", earth.mu_m3_s2, earth.radius_m)
    assert flat.default_model == "two-body"
    with pytest.raises(ValueError, match="needs a J2 term"):
        check_model("two-body+J2", flat)
    with pytest.raises(ValueError, match="model 'J4' is not known"):
        check_model("J4", earth)
