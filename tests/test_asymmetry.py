"""Geometry that breaks the symmetry: a fixed magnet off the beam's axis, gravity along the
deflection, and the fit of a restoring force with even powers.

References used here:
- Young & Budynas (2002), *Roark's Formulas for Stress and Strain*, 7th ed., McGraw-Hill,
  Table 8.1 (cantilever, end free): tip deflection wL⁴/(8EI) under a uniform load w (case 2a),
  WL³/(3EI) under an end load W (case 1a) and ML²/(2EI) under an end moment M (case 3a).
- Cardano's discriminant of the cubic (e.g. Abramowitz & Stegun 1964, Handbook of
  Mathematical Functions, 3.8.2): k3 x³ + k1 x − F0 has three real roots exactly when
  −(4 k1³ + 27 k3 F0²) > 0.
- The quadratic formula for the wells of k1 x + k2 x² + k3 x³ (harvester/METHODS.md §4).
Beam and magnet sizes are invented test geometry, never check values.
"""

from __future__ import annotations

import math
from pathlib import Path

import numpy as np
import pytest
from scipy.optimize import brentq

from harvester.build import (
    ExactWells,
    asymmetric_critical_gap,
    bistability_margin,
    build,
    exact_wells,
    fit_polynomial,
    split_series,
)
from harvester.case.load import parse_case
from harvester.model import ReducedModel, analyse_wells
from harvester.units import STANDARD_GRAVITY

BEAM = """
[beam]
length = "45 mm"
width = "10 mm"
substrate = {{ material = "spring-steel-1095", thickness = "0.25 mm" }}
coil = {{ flux_linkage = "3 V*s/m", resistance = "680 ohm", inductance = "25 mH" }}

[tip_magnet]
material = "NdFeB-N42"
disc = {{ diameter = "{diameter}", length = "{length}" }}
extra_mass = "{extra}"

[losses]
damping_ratio = 0.01

[load]
resistance = "750 ohm"
"""
FIXED = """
[fixed_magnet]
material = "NdFeB-N42"
disc = { diameter = "8 mm", length = "4 mm" }
gap = "%s"
offset = "%s"
"""


def geometry_case(*, gap="9.75 mm", offset="0 mm", gravity=None, diameter="8 mm",
                  length="4 mm", extra="0.3 g", magnets=True, magnet_model="exact"):
    text = BEAM.format(diameter=diameter, length=length, extra=extra)
    if magnets:
        text += FIXED % (gap, offset)
    if gravity is not None:
        text += f'\n[mounting]\ngravity = "{gravity}"\n'
    return build(parse_case(text, Path("asym.toml")), magnet_model=magnet_model)


# -- gravity --------------------------------------------------------------------------------
@pytest.mark.parametrize("diameter, length, extra, tolerance", [
    # heavy tip (R ≈ 1.7): the first mode is close to the static end-load shape; the single
    # mode then misses Roark's deflection by far less than 0.5 %
    ("8 mm", "4 mm", "0.3 g", 5e-3),
    # nearly bare beam (R ≈ 0.03): the first vibration mode, not the static shape, carries
    # the load; a single-mode (Rayleigh–Ritz) estimate of the uniform-load tip deflection is
    # 1.3 % high for the bare cantilever (its ∫ψ/∫ψ''² against 1/8, Blevins 1979 mode), so 2 %
    ("2 mm", "1 mm", "0 g", 2e-2),
])
def test_gravity_sags_the_beam_as_roark_table_8_1(diameter, length, extra, tolerance):
    # Roark Table 8.1: the beam's own weight (uniform load w = m g, case 2a), the tip body's
    # weight W at the tip (case 1a) and its moment W e about the tip, e the body's centre
    # beyond it (case 3a), superposed
    built = geometry_case(gravity="1 g", diameter=diameter, length=length, extra=extra,
                          magnets=False)
    design, props = built.beam_design, built.beam
    ei, span = props.bending_stiffness_N_m2, design.length_m
    w = props.mass_per_length_kg_per_m * STANDARD_GRAVITY
    weight = design.tip_mass_kg * STANDARD_GRAVITY
    roark = (w * span**4 / (8 * ei) + weight * span**3 / (3 * ei)
             + weight * design.tip_mass_offset_m * span**2 / (2 * ei))
    rest = analyse_wells(built.model).wells_m
    assert rest == (pytest.approx(built.static_deflection_m, rel=1e-9),)
    assert built.static_deflection_m == pytest.approx(roark, rel=tolerance)


def test_gravity_is_a_constant_force_through_the_forcing_mass():
    # m ẍ + F(x) = −m_f a + m_f G: the restoring force gains k0 = −m_f G, nothing else
    level = geometry_case(magnets=False)
    hanging = geometry_case(magnets=False, gravity="-0.5 g")
    m_f = hanging.model.forcing_mass_kg
    assert hanging.model.even_stiffness == (pytest.approx(0.5 * STANDARD_GRAVITY * m_f,
                                                          rel=1e-12),)
    assert hanging.model.stiffness == level.model.stiffness
    assert hanging.gravity_force_N == pytest.approx(-0.5 * STANDARD_GRAVITY * m_f, rel=1e-12)


def test_gravity_in_a_reduced_case():
    text = """
[reduced]
mass = "10 g"
forcing_mass = "12 g"
stiffness = { x1 = "-40 N/m", x2 = "1e3 N/m^2", x3 = "4e6 N/m^3" }
damping = "0.01 N*s/m"
[mounting]
gravity = "1 g"
"""
    model = build(parse_case(text, Path("r.toml"))).model
    assert model.force_coefficients[:4] == pytest.approx(
        (-0.012 * STANDARD_GRAVITY, -40.0, 1e3, 4e6), rel=1e-12)


# -- an offset fixed magnet -----------------------------------------------------------------
def test_offset_magnet_makes_unequal_wells_deeper_away_from_it():
    # a fixed magnet above the axis pushes the tip down: the lower well is the deeper one,
    # the saddle moves up; with the opposite offset the picture mirrors (to the fit's
    # tolerances); the fitted polynomial meets them on both wells
    up = geometry_case(offset="0.3 mm")
    down = geometry_case(offset="-0.3 mm")
    wells_up, wells_down = analyse_wells(up.model), analyse_wells(down.model)
    assert wells_up.regime == "bistable" and not up.model.is_symmetric
    assert wells_up.saddle_m > 0.0
    assert wells_up.barriers_J[0] > wells_up.barriers_J[1]
    assert up.fit.meets_tolerances and down.fit.meets_tolerances
    assert wells_down.saddle_m == pytest.approx(-wells_up.saddle_m, rel=2e-2)
    assert wells_down.barriers_J[::-1] == pytest.approx(wells_up.barriers_J, rel=2e-2)
    # the fitted wells and barriers are the exact force's within the fit's tolerances
    fit = up.fit
    s = fit.exact_saddle_m
    for got, exact in zip(wells_up.wells_m, fit.exact_wells_m):
        assert abs(got - exact) <= 0.005 * abs(exact - s)
    assert wells_up.barriers_J == pytest.approx(fit.exact_barriers_J, rel=0.01)


def test_offset_lowers_the_critical_gap():
    # an imperfect pitchfork: the asymmetry delays the second well, so the gap at which it
    # appears is below the symmetric pair's (Golubitsky & Schaeffer 1985, ch. 1, memory); just
    # inside it there are two wells, just outside one
    symmetric = geometry_case(magnet_model="dipole")
    offset = geometry_case(offset="0.3 mm", magnet_model="dipole")
    gap = offset.critical_gap_m
    assert 0.9 * symmetric.critical_gap_m < gap < symmetric.critical_gap_m
    inside = geometry_case(gap=f"{gap * 0.995 * 1e3} mm", offset="0.3 mm",
                           magnet_model="dipole")
    outside = geometry_case(gap=f"{gap * 1.005 * 1e3} mm", offset="0.3 mm",
                            magnet_model="dipole")
    assert analyse_wells(inside.model).regime == "bistable"
    assert analyse_wells(outside.model).regime == "monostable"


# -- the fit and the margin on closed forms -------------------------------------------------
def test_fit_polynomial_recovers_a_quadratic_cubic_force():
    # F = k0 + k1 x + k2 x² + k3 x³ is its own cubic fit: the coefficients come back to
    # rounding, and the wells and barriers are those of the closed form
    k0, k1, k2, k3 = 0.005, -40.0, 2e3, 4e6
    coefficients = (k0, k1, k2, k3)

    def force(x):
        return k0 + k1 * x + k2 * x**2 + k3 * x**3

    exact = exact_wells(force, 10e-3)
    x = np.linspace(-8e-3, 8e-3, 801)
    series, fit = fit_polynomial(x, force(x), k0, k1, exact)
    assert series[:4] == pytest.approx(coefficients, rel=1e-8)
    assert not any(abs(c) > 1e-6 * abs(k3) * 1e-3 ** (p - 3) for p, c in enumerate(series)
                   if p > 3)
    assert fit.meets_tolerances
    roots = np.sort(np.roots([k3, k2, k1, k0]).real)
    assert exact.wells_m == pytest.approx((roots[0], roots[2]), rel=1e-10)
    assert exact.saddle_m == pytest.approx(roots[1], rel=1e-8)

    def potential(x):
        return k0 * x + k1 * x**2 / 2 + k2 * x**3 / 3 + k3 * x**4 / 4

    closed = tuple(potential(roots[1]) - potential(w) for w in (roots[0], roots[2]))
    assert exact.barriers_J == pytest.approx(closed, rel=1e-10)
    odd, even = split_series(series)
    wells = analyse_wells(ReducedModel(1.0, 0.0, odd, 1.0, even_stiffness=even))
    assert wells.barriers_J == pytest.approx(closed, rel=1e-8)


@pytest.mark.parametrize("f0_over_critical", [0.5, 0.9, 0.99, 1.01, 1.1, 2.0])
def test_bistability_margin_follows_cardanos_discriminant(f0_over_critical):
    # k1 x + k3 x³ − F0: two wells exactly while −(4 k1³ + 27 k3 F0²) > 0, i.e. while
    # |F0| < F_c = √(−4 k1³/(27 k3))
    k1, k3 = -40.0, 4e6
    critical = math.sqrt(-4 * k1**3 / (27 * k3))
    f0 = f0_over_critical * critical

    def force(x):
        return k1 * x + k3 * x**3 - f0

    margin = bistability_margin(force, 20e-3)
    assert (margin > 0.0) == (-(4 * k1**3 + 27 * k3 * f0**2) > 0.0)
    assert exact_wells(force, 20e-3).bistable == (margin > 0.0)


def test_asymmetric_critical_gap_where_the_discriminant_vanishes():
    # a synthetic pair: k1(g) = k_b − A/g⁵ (the dipole pair's law, harvester/METHODS.md §3)
    # with a constant push F0; the saddle-node is where 4 k1(g)³ + 27 k3 F0² = 0
    k_b, a, k3, f0 = 30.0, 30.0 * 0.01**5, 4e6, 0.02

    def force_at(gap):
        k1 = k_b - a / gap**5
        return lambda x: k1 * x + k3 * x**3 - f0

    expected = brentq(lambda g: 4 * (k_b - a / g**5) ** 3 + 27 * k3 * f0**2, 5e-3, 0.01)
    found = asymmetric_critical_gap(force_at, 20e-3, 0.01)
    assert found == pytest.approx(expected, rel=1e-6)


def test_exact_wells_of_a_monostable_force():
    wells = exact_wells(lambda x: 30.0 * x + 1e6 * x**3 - 0.03, 20e-3)
    assert wells == ExactWells(wells_m=(pytest.approx(brentq(
        lambda x: 30.0 * x + 1e6 * x**3 - 0.03, 0.0, 0.01), rel=1e-10),), saddle_m=None,
        barriers_J=())
