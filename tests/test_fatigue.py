"""Fatigue over the service life: rainflow counting, Goodman, Basquin, Miner and the narrow-band
closed form, against ASTM E1049-85, Shigley, Miles (1954) and direct integration."""

from __future__ import annotations

import math
from collections import defaultdict

import numpy as np
import pytest
from scipy.integrate import quad

from harvester.analysis.fatigue import (
    BasquinLine,
    DeflectionCycles,
    basquin_cycles,
    basquin_line,
    deflection_cycles,
    fatigue_life,
    goodman_equivalent_amplitude,
    life_from_cycles,
    miner_damage,
    rainflow_cycles,
    random_record,
    rayleigh_tail_damage_rate,
    substrate_fatigue_life,
)
from harvester.analysis.safety import fatigue_life_check, substrate_fibres
from harvester.build import Built
from harvester.case.schema import Limits, Tone
from harvester.case.spectra import flat_band_psd
from harvester.materials import all_materials
from harvester.model import ReducedModel
from harvester.physics.beam import BeamDesign, beam_properties

KPSI = 6.894757293168361e6  # [Pa] (exact, from lbf and inch)
YEAR_S = 365.25 * 86400.0  # Julian year, as pint's "year"


# -- counting --------------------------------------------------------------------------------


def test_astm_e1049_rainflow_example():
    # ASTM E1049-85, Table X1 (rainflow counting, §5.4.4): the history −2, 1, −3, 5, −1, 3, −4,
    # 4, −2 gives ranges 3, 4, 6, 8, 9 with counts 0.5, 1.5, 0.5, 1.0, 0.5 (exact)
    ranges, means, counts = rainflow_cycles([-2, 1, -3, 5, -1, 3, -4, 4, -2])
    table = defaultdict(float)
    for r, n in zip(ranges, counts):
        table[float(r)] += float(n)
    assert dict(table) == {3.0: 0.5, 4.0: 1.5, 6.0: 0.5, 8.0: 1.0, 9.0: 0.5}
    # the full cycle of range 4 runs between −1 and 3 (same table): mean 1
    assert 1.0 in means[(ranges == 4.0) & (counts == 1.0)]


def test_constant_amplitude_miner_sum_is_n_over_N():
    # Palmgren–Miner (Miner 1945, J. Appl. Mech. 12:A159): n cycles at one amplitude use n/N of
    # the life.  The line passes through its own data point, so at S₂ it gives N₂ exactly; the
    # history ±S₂ of n full cycles (2n + 1 reversals) is counted as 2n half cycles.
    line = basquin_line(((1e3, 900e6), (1e7, 300e6)))
    n = 2500
    history = 300e6 * (-1.0) ** np.arange(2 * n + 1)
    ranges, means, counts = rainflow_cycles(history)
    assert counts.sum() == n
    damage = miner_damage(ranges / 2, counts, line)
    assert damage == pytest.approx(n / 1e7, rel=1e-12)


# -- Goodman and Basquin ---------------------------------------------------------------------


@pytest.mark.parametrize("mean", [0.0, 100e6, 250e6])
def test_goodman_equivalent_amplitude_lies_on_the_goodman_line(mean):
    # The equivalent fully reversed amplitude S of a cycle (σa, σm) is the intercept of the
    # Goodman line through (σm, σa) and (S_ut, 0): σa/S + σm/S_ut = 1 (Budynas & Nisbett 2011,
    # Shigley's MED, 9th ed., §6–12; Dowling, Mechanical Behavior of Materials, ch. 9 (memory))
    s_ut, sigma_a = 400e6, 80e6
    s = goodman_equivalent_amplitude(sigma_a, mean, s_ut)
    assert sigma_a / s + mean / s_ut == pytest.approx(1.0, rel=1e-14)
    # a compressive mean is not taken as a help (the same convention as the Goodman check)
    assert goodman_equivalent_amplitude(sigma_a, -mean, s_ut) == pytest.approx(sigma_a)


def test_basquin_line_reproduces_shigley_example_6_2():
    # Budynas & Nisbett (2011), Shigley's MED, 9th ed., Example 6–2 (memory): 1050 HR steel,
    # S_ut = 90 kpsi, S'e = 45 kpsi at 10⁶, f = 0.86 at 10³: a = 133.1 kpsi, b = −0.0785;
    # strength at 10⁴ cycles 64.6 kpsi; life at a reversed 55 kpsi 77 500 cycles.  Shigley
    # writes S = a N^b; the Basquin form S_f′(2N)^b through the same two points is the same
    # line.  1 % covers the example's rounding of a and b (N moves 13 % per % of stress).
    line = basquin_line(((1e3, 0.86 * 90 * KPSI), (1e6, 45 * KPSI)))
    assert line.exponent == pytest.approx(-0.0785, rel=2e-3)
    strength = line.fatigue_coefficient_Pa * (2 * 1e4) ** line.exponent
    assert strength == pytest.approx(64.6 * KPSI, rel=1e-2)
    assert basquin_cycles(55 * KPSI, line) == pytest.approx(77_500, rel=1e-2)


def test_marin_factors_lower_only_the_long_life_point():
    # Shigley ch. 6: S_e = k_a k_b k_e S_e′ at the long-life end; the 10³-cycle strength f·S_ut
    # is not modified
    points = ((1e3, 900e6), (1e6, 450e6))
    line = basquin_line(points, marin_factor=0.8)
    assert basquin_cycles(900e6, line) == pytest.approx(1e3, rel=1e-12)
    assert basquin_cycles(0.8 * 450e6, line) == pytest.approx(1e6, rel=1e-12)
    with pytest.raises(ValueError, match="fall with life"):
        basquin_line(((1e3, 400e6), (1e6, 450e6)))


def test_every_substrate_material_gives_a_falling_sn_line():
    substrates = [m for m in all_materials().values() if m.kind == "substrate"]
    assert len(substrates) >= 7
    for mat in substrates:
        (n1, s1), (n2, s2) = mat.sn_points
        assert n1 < n2 and s1 > s2
        assert mat.sources["short_life_fatigue_strength"].strip()
        # Shigley ch. 6 (memory): at 10³ cycles the strength is f·S_ut with f between 0.7 and 0.9
        assert 0.69 <= s1 / mat.get("ultimate_strength") <= 0.9 + 1e-9
        assert -0.2 < basquin_line(mat.sn_points).exponent < -0.05


# -- narrow band -----------------------------------------------------------------------------


def test_rayleigh_tail_is_the_integral_beyond_the_threshold():
    # Expected damage rate of Rayleigh amplitudes above S₀ on N S^m = C, against direct
    # quadrature of ν ∫ p(S)/N(S) dS (Miles 1954, J. Aeronaut. Sci. 21:753, with the lower
    # limit raised); quad is good to 1e-10 here
    line = BasquinLine(1.2e9, -1 / 7.5)
    sigma, nu = 40e6, 30.0
    for threshold in (0.0, 1.5 * sigma, 4 * sigma):
        direct = nu * quad(lambda s: s / sigma**2 * math.exp(-s * s / (2 * sigma**2))
                           / basquin_cycles(s, line), threshold, 20 * sigma, limit=200)[0]
        got = rayleigh_tail_damage_rate(nu, sigma, threshold, line)
        assert got == pytest.approx(direct, rel=1e-8)


def test_narrow_band_damage_matches_miles():
    # A lightly damped linear oscillator (50 Hz, ζ = 1 %) under a flat band of base
    # acceleration has a narrow-band Gaussian response; its rainflow damage on N S^m = C agrees
    # with the Rayleigh closed form ν₀⁺ T (√2 σ)^m Γ(1 + m/2)/C (Miles 1954, J. Aeronaut. Sci.
    # 21:753; Wirsching & Light 1980, J. Struct. Div. ASCE 106:1593), σ² and ν₀⁺ = √(m₂/m₀)/2π
    # from quadrature of the response spectrum.  5 %: the record holds about 1.6e5 cycles, 5e3
    # independent envelopes (sampling error ≈ 2 % for m = 3), and rainflow on a process this
    # narrow is within 1–3 % of the narrow-band formula (Wirsching & Light's correction).
    m, fn, zeta = 0.01, 50.0, 0.01
    wn = 2 * math.pi * fn
    k, c = m * wn**2, 2 * zeta * m * wn
    lo, hi, rms = 25.0, 100.0, 5.0
    level = rms**2 / (hi - lo)

    def receptance2(f):
        w = 2 * math.pi * f
        return m**2 / ((k - m * w * w) ** 2 + (c * w) ** 2)

    m0 = quad(lambda f: level * receptance2(f), lo, hi, points=[fn], limit=200)[0]
    m2 = quad(lambda f: (2 * math.pi * f) ** 2 * level * receptance2(f), lo, hi, points=[fn],
              limit=200)[0]
    nu, sigma = math.sqrt(m2 / m0) / (2 * math.pi), math.sqrt(m0)
    stress_per_m = 1e6 / sigma  # 1 MPa RMS
    line = BasquinLine(1e9, -1 / 3)
    record = random_record(ReducedModel(m, c, (k,), m), flat_band_psd(lo, hi, rms), seed=1,
                           realisations=16, cycles=160_000)
    cycles = deflection_cycles(record, mirror_one_well=False)
    rate = miner_damage(stress_per_m * cycles.range_m / 2, cycles.count, line) \
        / cycles.duration_s.sum()
    miles = nu * (math.sqrt(2) * 1e6) ** 3 * math.gamma(2.5) / line.constant_C
    assert rate == pytest.approx(miles, rel=0.05)


# -- the life record and its check -----------------------------------------------------------


def _constant_cycles(count, range_m, mean_m, duration_s):
    return DeflectionCycles(np.full(1, range_m), np.full(1, mean_m), np.full(1, float(count)),
                            np.zeros(1, dtype=np.int64), np.array([duration_s]))


def test_life_of_a_constant_amplitude_history():
    # 1e5 reversed cycles per hour at the line's 10⁶-cycle strength: Miner D = 0.1 per hour
    # (Miner 1945), so the life is 10 h; with zero mean and no tail every stress × n multiplies
    # the damage by n^m, so the design life is used up at n = (1/D_design)^(1/m) (Basquin).
    line = basquin_line(((1e3, 900e6), (1e6, 450e6)))
    s = 450e6 / 1e-3  # stress per unit deflection: 1 mm amplitude gives 450 MPa
    cycles = _constant_cycles(1e5, 2e-3, 0.0, 3600.0)
    design = 100.0 * 3600.0
    fields = life_from_cycles(cycles, np.array([s, -s]), ("face", "face (mirrored)"), line,
                              1e9, design, pooled=True, tail=False, separate_snap_through=False)
    assert fields["damage_per_hour"] == pytest.approx(0.1, rel=1e-12)
    assert fields["life_years"] == pytest.approx(10.0 / (YEAR_S / 3600.0), rel=1e-12)
    assert fields["margin"] == pytest.approx(0.1, rel=1e-12)
    assert fields["stress_factor"] == pytest.approx(0.1 ** (1 / line.slope_m), rel=1e-5)
    assert fields["failing_share"] == 1.0


def test_fatigue_life_in_years():
    # one Julian year is 8766 h (365.25 d, pint's "year")
    assert fatigue_life(1.0 / 8766.0) == pytest.approx(1.0, rel=1e-14)
    assert fatigue_life(0.0) == math.inf


def _beam(damping_ratio=0.02):
    """A homogeneous 6061-T6 strip (no magnets, no transducer) with its exact first mode."""
    design = BeamDesign(0.06, 0.01, 0.5e-3, 68.9e9, 2700.0)
    props = beam_properties(design)
    k, m = props.tip_stiffness_N_per_m, props.effective_mass_kg
    model = ReducedModel(m, 2 * damping_ratio * math.sqrt(k * m), (k,), props.forcing_mass_kg,
                         linear_stiffness_N_per_m=k)
    return Built(model=model, beam=props, beam_design=design, tip=None, fixed=None, gap_m=None,
                 fit=None, critical_gap_m=None, magnet_model="exact")


@pytest.mark.parametrize("design_years, level", [(1e-3, "pass"), (30.0, "fail")])
def test_tone_life_of_a_linear_beam_is_the_harmonic_response(design_years, level):
    # A linear beam under a tone settles on one harmonic orbit, X = m_f A/|k − mω² + iωc|
    # (steady state of a damped oscillator; any vibration text, e.g. Thomson & Dahleh,
    # Theory of Vibration with Applications, ch. 3): f reversed cycles per second at the root
    # stress s·X, so D/s = f/N(sX) on the material's Basquin line.  1 % in damage: the starts
    # settle for 8 amplitude e-folds (e⁻⁸ = 3e-4 of the start's offset may remain), and the
    # damage goes as X^m with m ≈ 12, so up to 0.4 %; the RK4 reversals add about 1e-5.
    built = _beam()
    model = built.model
    frequency, amplitude = 110.0, 80.0  # near resonance (113 Hz): about 60 MPa, life ≈ 10 years
    w = 2 * math.pi * frequency
    x = model.forcing_mass_kg * amplitude / abs(
        complex(model.k1 - model.mass_kg * w * w, w * model.damping_N_s_per_m))
    substrate = all_materials()["aluminium-6061-t6"]
    limits = Limits.model_validate({"design_life": f"{design_years} years",
                                    "marin": {"surface": 0.9}})
    tone = Tone.model_validate({"frequency": f"{frequency} Hz", "amplitude": f"{amplitude} m/s^2"})
    life, check = substrate_fatigue_life(built, limits, model, tone, substrate=substrate)
    where, stress = substrate_fibres(built)
    line = basquin_line(substrate.sn_points, 0.9)
    expected = frequency / basquin_cycles(np.max(np.abs(stress)) * x, line) * 3600.0
    assert life.damage_per_hour == pytest.approx(expected, rel=1e-2)
    assert life.tail_damage_per_hour == 0.0 and life.excitation == "tone"
    assert life.design_life_years == pytest.approx(design_years)
    assert check.name == "substrate fatigue life (Miner)" and check.level == level
    assert check.margin == pytest.approx(life.life_years / design_years, rel=1e-12)
    assert "ASTM E1049-85" in check.basis and "Marin 0.9" in check.basis


def test_check_warns_when_the_stress_factor_is_below_the_safety_factor():
    line = basquin_line(((1e3, 900e6), (1e6, 450e6)))
    s = 450e6 / 1e-3
    cycles = _constant_cycles(1e5, 2e-3, 0.0, 3600.0)
    # design life 1 h uses 0.1 of the life: margin 10, but n = 10^(1/m) ≈ 1.26 < 1.5
    fields = life_from_cycles(cycles, np.array([s]), ("face",), line, 1e9, 3600.0,
                              pooled=True, tail=False, separate_snap_through=False)
    from harvester.analysis.fatigue import FatigueLife

    life = FatigueLife(**fields, flagged=0, fatigue_coefficient_Pa=line.fatigue_coefficient_Pa,
                       basquin_exponent=line.exponent, marin_factor=1.0, excitation="random",
                       tail_basis="none")
    material = all_materials()["aluminium-6061-t6"]
    check = fatigue_life_check(life, 1.5, material, ((1e3, 900e6), (1e6, 450e6)))
    assert check.margin == pytest.approx(10.0) and check.level == "warn"
    assert fatigue_life_check(life, 1.2, material, ((1e3, 900e6), (1e6, 450e6))).level == "pass"


def test_limits_take_a_design_life_and_marin_factors():
    # default 10 years; pint's year is the Julian year (365.25 d)
    assert Limits().design_life == pytest.approx(10 * YEAR_S)
    assert Limits().marin.product == 1.0
    limits = Limits.model_validate({"design_life": "20 years",
                                    "marin": {"surface": 0.8, "reliability": 0.814}})
    assert limits.design_life == pytest.approx(20 * YEAR_S)
    assert limits.marin.product == pytest.approx(0.8 * 0.814)
    with pytest.raises(ValueError, match="factor in"):
        Limits.model_validate({"marin": {"size": 1.2}})
    with pytest.raises(ValueError, match="not a time"):
        Limits.model_validate({"design_life": "3 m"})


def test_stress_factor_survives_a_mean_stress_past_the_ultimate():
    # scaling every stress until the mean passes S_ut leaves Goodman no life at all (Shigley
    # ch. 6: the line ends at σm = S_ut); the search must read that as "used up", not fail
    from harvester.analysis.fatigue import BasquinLine, _stress_factor

    line = BasquinLine(1e9, -0.1)

    def damage(n):
        return float("nan") if n > 50.0 else (n / 10.0) ** line.slope_m

    assert _stress_factor(damage, damage(1.0), line) == pytest.approx(10.0, rel=1e-3)
