"""Stress below fill bodies built by the geometry builders, against independent results."""
import math

import pytest
import shapely
from scipy import integrate

from fillstress import vertical_stress
from fillstress.grid import GridSpec
from fillstress.shapes.embankment import embankment_thickness
from fillstress.shapes.stockpile import pile_thickness


def cone_centre_stress(q0, radius, z):
    """Δσz under the apex of a conical load q(r) = q0 (1 − r/R): the Boussinesq point load
    3Q z³ / (2π R⁵) integrated over rings with scipy.integrate.quad (independent of the grid)."""
    def ring(r):
        return q0 * (1 - r / radius) * 3 * z**3 / (2 * math.pi * (r * r + z * z) ** 2.5) \
            * 2 * math.pi * r
    return integrate.quad(ring, 0.0, radius, epsabs=1e-12, limit=200)[0]


@pytest.mark.parametrize("z", [2.0, 6.0, 15.0])
def test_conical_pile_centre_matches_ring_integration(z):
    radius, angle, gamma = 20.0, 35.0, 18.0          # invented pile: 14 m high cone
    toe = shapely.Point(0, 0).buffer(radius, quad_segs=256)
    spec = GridSpec.covering(toe.bounds, 0.5, margin=1.0)
    grid = spec.load_grid(gamma * pile_thickness(toe, angle, spec))
    q0 = gamma * radius * math.tan(math.radians(angle))
    computed = vertical_stress(grid, [[0.0, 0.0, z]])[0]
    assert computed == pytest.approx(cone_centre_stress(q0, radius, z), rel=0.01)


def osterberg_influence(a, b, z):
    """Osterberg (1957) influence value of one half of a symmetric embankment (slope width a,
    half crest b) under the centreline: I = [((a+b)/a)(α1+α2) − (b/a)α2] / π."""
    a2 = math.atan(b / z)
    a1 = math.atan((a + b) / z) - a2
    return (((a + b) / a) * (a1 + a2) - (b / a) * a2) / math.pi


@pytest.mark.parametrize("z", [3.0, 8.0])
def test_long_built_embankment_matches_osterberg(z):
    h, crest, n, gamma = 5.0, 12.0, 2.0, 20.0        # invented: 5 m bank, 2H:1V slopes
    line = shapely.LineString([(0, 0), (600, 0)])           # ends 300 m ≫ z away
    spec = GridSpec(-2.0, -30.0, 1.0, 1.0, 604, 60)
    t = embankment_thickness(line, spec, crest_width=crest, side_slope=n, heights=h,
                             start_slope="vertical", end_slope="vertical")
    grid = spec.load_grid(gamma * t)
    computed = vertical_stress(grid, [[300.0, 0.0, z]])[0]
    expected = 2 * gamma * h * osterberg_influence(n * h, crest / 2, z)
    assert computed == pytest.approx(expected, rel=0.01)
