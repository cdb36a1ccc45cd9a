"""Frame rotations: published geometry, astropy's ecliptic frame, and algebraic properties."""

from __future__ import annotations

import astropy.units as u
import numpy as np
import pytest
from astropy.coordinates import ICRS, BarycentricMeanEcliptic, CartesianRepresentation
from hypothesis import given, settings
from hypothesis import strategies as st
from hypothesis.extra.numpy import arrays

from solver.constants import OBLIQUITY_J2000_DEG
from solver.ephemeris.frames import EquatorFrame, equator_frame, rotate, rotation_matrix
from solver.errors import InputError


def _dec_ra_deg(v):
    v = np.asarray(v, dtype=float)
    dec = np.degrees(np.arcsin(v[..., 2] / np.linalg.norm(v, axis=-1)))
    ra = np.degrees(np.arctan2(v[..., 1], v[..., 0])) % 360.0
    return dec, ra


def test_obliquity_is_iau_2006():
    # 84381.406 arcsec [FOUND: docs/references.md 4.4, SOFA obl06] = 23.4392794 deg.
    assert OBLIQUITY_J2000_DEG == pytest.approx(23.4392794, abs=1e-7)


def test_ecliptic_pole_and_y_axis_in_icrf():
    # docs/references.md 6 [MEMORY, geometry]: a vector along ecliptic +z has declination 90 - eps;
    # along ecliptic +y, declination eps and right ascension 90 deg.
    dec, _ = _dec_ra_deg(rotate([0.0, 0.0, 1.0], "ecliptic", "icrf"))
    assert dec == pytest.approx(90.0 - OBLIQUITY_J2000_DEG, abs=1e-12)
    dec, ra = _dec_ra_deg(rotate([0.0, 1.0, 0.0], "ecliptic", "icrf"))
    assert dec == pytest.approx(OBLIQUITY_J2000_DEG, abs=1e-12)
    assert ra == pytest.approx(90.0, abs=1e-12)
    # The equinox (x axis) is shared.
    np.testing.assert_allclose(rotate([1.0, 0.0, 0.0], "icrf", "ecliptic"), [1.0, 0.0, 0.0])


def test_matches_astropy_barycentric_mean_ecliptic_j2000():
    # astropy includes the ICRS-to-J2000 frame bias (~0.02 arcsec) we neglect; agreement to
    # 0.1 arcsec shows the axis, sign and angle are right.
    rng = np.random.default_rng(3)
    xyz = rng.normal(size=(50, 3))
    icrs = ICRS(CartesianRepresentation(xyz.T * u.km), representation_type="cartesian")
    ecl = icrs.transform_to(BarycentricMeanEcliptic(equinox="J2000"))
    ref = ecl.cartesian.xyz.to_value(u.km).T
    ours = rotate(xyz, "icrf", "ecliptic")
    angle = np.linalg.norm(np.cross(ours, ref), axis=-1) / np.linalg.norm(ref, axis=-1) ** 2
    assert np.degrees(angle.max()) * 3600 < 0.1


@settings(max_examples=50, deadline=None)
@given(arrays(np.float64, (4, 3), elements=st.floats(-1e9, 1e9)))
def test_round_trip_and_norm(vectors):
    there = rotate(vectors, "icrf", "ecliptic")
    back = rotate(there, "ecliptic", "icrf")
    np.testing.assert_allclose(back, vectors, atol=1e-6)
    np.testing.assert_allclose(
        np.linalg.norm(there, axis=-1), np.linalg.norm(vectors, axis=-1), rtol=1e-14, atol=1e-6
    )


@pytest.mark.parametrize("frames", [("icrf", "ecliptic"), ("ecliptic", "icrf"), ("icrf", "icrf")])
def test_matrices_are_proper_rotations(frames):
    m = rotation_matrix(*frames)
    np.testing.assert_allclose(m @ m.T, np.eye(3), atol=1e-15)
    assert np.linalg.det(m) == pytest.approx(1.0, abs=1e-15)


def test_shapes_broadcast():
    for shape in [(3,), (5, 3), (2, 4, 3)]:
        assert rotate(np.ones(shape), "icrf", "ecliptic").shape == shape
    with pytest.raises(InputError, match="vectors"):
        rotate(np.ones((3, 2)), "icrf", "ecliptic")


def test_equator_frame_axes():
    # Mars pole (IAU, J2000): the pole maps to +z and the x axis is the ascending node of the
    # Mars equator on the ICRF equator, at right ascension pole_ra + 90 deg (IAU convention).
    frame = equator_frame(317.68143, 52.88650, "mars equator")
    assert isinstance(frame, EquatorFrame)
    ra, dec = np.radians(317.68143), np.radians(52.88650)
    pole = np.array([np.cos(dec) * np.cos(ra), np.cos(dec) * np.sin(ra), np.sin(dec)])
    np.testing.assert_allclose(rotate(pole, "icrf", frame), [0.0, 0.0, 1.0], atol=1e-15)
    x_in_icrf = rotate([1.0, 0.0, 0.0], frame, "icrf")
    dec_x, ra_x = _dec_ra_deg(x_in_icrf)
    assert dec_x == pytest.approx(0.0, abs=1e-12)
    assert ra_x == pytest.approx((317.68143 + 90.0) % 360.0, abs=1e-9)
    m = rotation_matrix("ecliptic", frame)
    np.testing.assert_allclose(m @ m.T, np.eye(3), atol=1e-15)


def test_bad_frames():
    with pytest.raises(InputError, match="from_frame"):
        rotate([1.0, 0.0, 0.0], "galactic", "icrf")
    with pytest.raises(InputError, match="pole_dec_deg"):
        equator_frame(10.0, 95.0)
