"""Reduced model: wells, barrier, frequencies, force fit and critical gap against closed forms."""

from __future__ import annotations

import math

import numpy as np
import pytest

from harvester.build import critical_gap, fit_odd_polynomial
from harvester.model import (
    ReducedModel,
    analyse_wells,
    nondimensional_groups,
    stable_equilibria,
)
from harvester.physics import magnets as mag

MU0 = 4e-7 * math.pi  # vacuum permeability [H/m] (CODATA; 4π×10⁻⁷ to 1e-9 relative)


def _duffing(k1: float, k3: float, m: float = 0.01) -> ReducedModel:
    return ReducedModel(mass_kg=m, damping_N_s_per_m=0.01, stiffness=(k1, k3),
                        forcing_mass_kg=m, linear_stiffness_N_per_m=abs(k1) * 3)


@pytest.mark.parametrize("k1, k3", [(-1.0, 1.0), (-40.0, 4e6), (-250.0, 3e7)])
def test_double_well_closed_forms(k1, k3):
    # Double well m ẍ + k1 x + k3 x³ = 0 (methods.md §4; e.g. Kovacic & Brennan 2011, The Duffing
    # Equation, Wiley, ch. 1): wells ±√(−k1/k3), barrier k1²/(4k3), well frequency √2·√(−k1/m)
    model = _duffing(k1, k3)
    wells = analyse_wells(model)
    x0 = math.sqrt(-k1 / k3)
    assert wells.regime == "bistable"
    assert wells.wells_m == pytest.approx((-x0, x0), rel=1e-12)
    assert wells.barrier_J == pytest.approx(k1 * k1 / (4 * k3), rel=1e-12)
    omega0 = math.sqrt(-k1 / model.mass_kg)
    assert wells.well_frequency_Hz == pytest.approx(math.sqrt(2) * omega0 / (2 * math.pi),
                                                    rel=1e-12)
    groups = nondimensional_groups(model)
    assert groups["x0_m"] == pytest.approx(x0, rel=1e-12)
    assert groups["delta"] == pytest.approx(0.01 / (model.mass_kg * omega0), rel=1e-12)


def test_hardening_oscillator_is_monostable():
    # k1 > 0, k3 > 0: single equilibrium at 0, small-oscillation frequency √(k1/m)/2π
    model = _duffing(100.0, 1e6, m=0.004)
    wells = analyse_wells(model)
    assert wells.regime == "monostable"
    assert wells.wells_m == (0.0,)
    assert wells.barrier_J == 0.0
    assert wells.well_frequency_Hz == pytest.approx(math.sqrt(100.0 / 0.004) / (2 * math.pi))


def test_quintic_wells_from_the_quadratic_in_x_squared():
    # F = k1 x + k3 x³ + k5 x⁵ = 0 → x² = (−k3 + √(k3² − 4 k1 k5))/(2 k5) (quadratic formula)
    k1, k3, k5 = -2.0, 1.0, 0.5
    y = (-k3 + math.sqrt(k3 * k3 - 4 * k1 * k5)) / (2 * k5)
    assert stable_equilibria((k1, k3, k5)) == pytest.approx((-math.sqrt(y), math.sqrt(y)))


def test_fit_recovers_an_exact_cubic():
    # least squares on an exactly representable table must return it (to round-off)
    x = np.linspace(-0.01, 0.01, 201)
    force = -40.0 * x + 4e6 * x**3
    stiffness, rms, worst = fit_odd_polynomial(x, force, k1=-40.0)
    assert stiffness[:2] == pytest.approx((-40.0, 4e6), rel=1e-9)
    assert rms < 1e-12 and worst < 1e-12


def test_critical_gap_matches_the_coaxial_dipole_closed_form():
    # Two repelling coaxial dipoles without rotation: onset of bistability where
    # k_b + U''(0) = 0, d_c = (3 μ0 m_a m_b/(π k_b))^(1/5) centre to centre (methods.md §3,
    # from the dipole energy of Yung, Landecker & Villani 1998)
    block = mag.Block(axial_m=5e-3, width_m=10e-3, deflection_m=5e-3, remanence_T=1.3)
    moment = block.remanence_T * 5e-3 * 10e-3 * 5e-3 / MU0
    k_beam = 160.0
    centre = (3 * MU0 * moment * moment / (math.pi * k_beam)) ** 0.2
    expected_gap = centre - 5e-3  # two half-lengths between centres and faces
    assert critical_gap(k_beam, block, block, slope=0.0, magnet_model="dipole") == pytest.approx(
        expected_gap, rel=1e-6)
