"""Mean power under a tone against the linear resonant generator and the coupled double well."""

import json
import math

import numpy as np
import pytest

from harvester.analysis.tone_power import (
    linear_matched_load,
    linear_tone_power,
    matched_load,
    tone_power,
    tone_power_sweep,
)
from harvester.dynamics.orbits import CHAOTIC, INTERWELL_PERIODIC, KINDS
from harvester.model import CoilCircuit, PiezoCircuit, ReducedModel

MASS, F_N, ZETA_M = 0.01, 20.0, 0.02
OMEGA_N = 2 * math.pi * F_N
K = MASS * OMEGA_N**2
C_M = 2 * ZETA_M * MASS * OMEGA_N


def linear(transducer, load_ohm):
    return ReducedModel(mass_kg=MASS, damping_N_s_per_m=C_M, stiffness=(K,), forcing_mass_kg=MASS,
                        transducer=transducer, load_ohm=load_ohm, linear_stiffness_N_per_m=K)


def williams_yates(zeta_e, amplitude, omega):
    """Williams & Yates (1996), Sens. Actuators A 52:8: mean power into the electrical damping of
    a base-excited resonant generator, base displacement Y0 = A/ω², r = ω/ω_n:
    P = m ζ_e Y0² r³ ω³ / ((1 − r²)² + (2 ζ_T r)²);  at r = 1, P = m ζ_e A²/(4 ζ_T² ω_n)."""
    r = omega / OMEGA_N
    y0 = amplitude / omega**2
    zeta_t = ZETA_M + zeta_e
    return MASS * zeta_e * y0**2 * r**3 * omega**3 / ((1 - r * r) ** 2 + (2 * zeta_t * r) ** 2)


def test_resistive_coil_at_resonance():
    # a coil without inductance is a viscous damper (Bl)²/R (harvester/METHODS.md §2); R_c = 0
    # so the load takes all of it
    bl, load = 0.8, 20.0
    model = linear(CoilCircuit(bl, 0.0, 0.0), load)
    zeta_e = bl**2 / load / (2 * MASS * OMEGA_N)
    expected = williams_yates(zeta_e, 2.0, OMEGA_N)
    assert expected == pytest.approx(MASS * zeta_e * 4.0 / (4 * (ZETA_M + zeta_e) ** 2 * OMEGA_N))
    result = tone_power(model, 2.0, F_N, n_initial=4)
    assert result.mean_power_W == pytest.approx(expected, rel=1e-3)
    assert linear_tone_power(model, 2.0, F_N) == pytest.approx(expected, rel=1e-9)
    assert result.linear_power_W == pytest.approx(expected, rel=1e-9)
    # P = R_l i_rms²
    assert load * result.rms_current_A**2 == pytest.approx(result.mean_power_W, rel=1e-6)
    assert result.hop_rate_per_s == 0.0
    assert [o.kind for o in result.orbits] == ["intrawell"]


def test_piezo_in_the_weak_coupling_limit_at_resonance():
    # weakly coupled piezo: electrical damping c_e = θ²R/(1 + (ω_n R C)²) at resonance and a
    # negligible stiffness shift (k_e/k ≈ 6e-6), so Williams & Yates applies
    theta, cap = 1e-4, 5e-8
    load = 1.0 / (OMEGA_N * cap)
    model = linear(PiezoCircuit(theta, cap), load)
    zeta_e = theta**2 * load / (1 + (OMEGA_N * load * cap) ** 2) / (2 * MASS * OMEGA_N)
    expected = williams_yates(zeta_e, 2.0, OMEGA_N)
    result = tone_power(model, 2.0, F_N, n_initial=4)
    assert result.mean_power_W == pytest.approx(expected, rel=2e-3)
    assert result.linear_power_W == pytest.approx(expected, rel=2e-3)
    assert result.rms_voltage_V**2 / load == pytest.approx(result.mean_power_W, rel=1e-6)


def test_sweep_follows_the_resonance_curve():
    bl, load = 0.5, 10.0
    model = linear(CoilCircuit(bl, 0.0, 0.0), load)
    zeta_e = bl**2 / load / (2 * MASS * OMEGA_N)
    freqs = F_N * np.array([0.5, 0.8, 0.95, 1.0, 1.1, 1.6, 2.5])
    rows = tone_power_sweep(model, 3.0, freqs, n_initial=4)
    expected = williams_yates(zeta_e, 3.0, 2 * math.pi * freqs)
    np.testing.assert_allclose([r.mean_power_W for r in rows], expected, rtol=2e-3)
    np.testing.assert_allclose([r.linear_power_W for r in rows], expected, rtol=1e-9)


def test_matched_resistive_coil_has_electrical_equal_to_mechanical_damping():
    # Williams & Yates (1996): the power peaks at ζ_e = ζ_m, i.e. R_l = (Bl)²/c for R_c = 0
    bl = 0.8
    model = linear(CoilCircuit(bl, 0.0, 0.0), 10.0)
    best = matched_load(model, 2.0, F_N, n_initial=2)
    assert best.load_ohm == pytest.approx(bl**2 / C_M, rel=0.02)
    zeta = ZETA_M
    assert best.mean_power_W == pytest.approx(MASS * 4.0 / (16 * zeta * OMEGA_N), rel=1e-3)


def test_matched_weakly_coupled_piezo_load_is_the_capacitive_reactance():
    # weak coupling: the electrical damping θ²R/(1 + (ωRC)²) peaks at R = 1/(ωC) (Erturk &
    # Inman 2011, Piezoelectric Energy Harvesting, ch. 3, memory)
    theta, cap = 1e-4, 5e-8
    model = linear(PiezoCircuit(theta, cap), 1e5)
    best = matched_load(model, 2.0, F_N, n_initial=2)
    assert best.load_ohm == pytest.approx(1.0 / (OMEGA_N * cap), rel=0.03)


def erturk_hoffmann_inman():
    """Erturk, Hoffmann & Inman (2009), Appl. Phys. Lett. 94:254102 (memory) as a
    reduced model; see tests/test_orbits.py for the mapping."""
    return ReducedModel(mass_kg=1.0, damping_N_s_per_m=0.02, stiffness=(-0.5, 0.5),
                        forcing_mass_kg=1.0, transducer=PiezoCircuit(0.05, 0.1), load_ohm=200.0)


def test_large_interwell_orbit_dominates_and_chaos_is_confirmed():
    # f = 0.115, Ω = 0.8: the large period-1 interwell orbit (amplitude ≈ 1.85, memory); it
    # crosses the barrier twice a period.  Members that hop without repeating are chaotic only
    # with a positive largest Lyapunov exponent (Benettin et al. 1980, Meccanica 15:9); the
    # slowly settling ones (exponent ≤ 0) are reported as interwell-periodic of period 0.
    f_hz = 0.8 / (2 * math.pi)
    result = tone_power(erturk_hoffmann_inman(), 0.115, f_hz, n_initial=24, seed=0,
                        transient_periods=300, average_periods=32)
    main = result.orbits[0]
    assert main.kind == INTERWELL_PERIODIC and main.period == 1 and main.share > 0.5
    assert main.max_abs_x_m == pytest.approx(1.85, rel=0.02)
    assert main.hop_rate_per_s == pytest.approx(2 * f_hz, rel=0.02)
    unsettled = [o for o in result.orbits if o.kind == INTERWELL_PERIODIC and o.period == 0]
    assert unsettled and all(o.lyapunov_per_s <= 0.0 for o in unsettled)
    assert all(o.lyapunov_per_s > 0.0 for o in result.orbits if o.kind == CHAOTIC)
    shares = sum(o.share for o in result.orbits) + result.flagged_share
    assert shares == pytest.approx(1.0)
    assert result.mean_power_W == pytest.approx(
        sum(o.share * o.mean_power_W for o in result.orbits))
    assert result.linear_power_W is None


def test_chaotic_orbit_mix_and_json():
    # f = 0.083 (same paper, memory): chaotic motion; its exponent must come out positive
    result = tone_power(erturk_hoffmann_inman(), 0.083, 0.8 / (2 * math.pi), n_initial=16,
                        transient_periods=300, average_periods=32)
    chaotic = [o for o in result.orbits if o.kind == CHAOTIC]
    assert chaotic and chaotic[0].lyapunov_per_s > 0.0
    payload = json.loads(json.dumps(result.to_dict()))
    for key in ("mean_power_W", "hop_rate_per_s", "rms_voltage_V", "linear_power_W", "orbits"):
        assert key in payload
    assert {o["kind"] for o in payload["orbits"]} <= set(KINDS)
    assert all({"kind", "share", "mean_power_W"} <= set(o) for o in payload["orbits"])


@pytest.mark.parametrize("transducer", [
    CoilCircuit(flux_linkage_V_s_per_m=0.5, resistance_ohm=50.0, inductance_H=0.3),
    PiezoCircuit(coupling_N_per_V=3e-3, capacitance_F=60e-9),  # k²/ζ ≈ 3: strongly coupled
])
def test_linear_matched_load_maximises_the_linear_power(transducer):
    # A resistive load takes the most power from a linear source when R = |Z_source| (maximum
    # power transfer); here the source impedance includes the beam's motion.  Reference: the
    # linear closed-form power (Williams & Yates 1996; `linear_tone_power`) maximised over a
    # fine logarithmic grid of loads, at resonance and off it.
    beam = ReducedModel(mass_kg=0.01, damping_N_s_per_m=0.02, stiffness=(400.0,),
                        forcing_mass_kg=0.012, transducer=transducer)
    f_n = math.sqrt(400.0 / 0.01) / (2 * math.pi)
    for f in (f_n, 1.1 * f_n):
        best = linear_matched_load(beam, f)
        loads = best * np.geomspace(0.5, 2.0, 2001)
        power = [float(linear_tone_power(beam.with_load(r), 1.0, f)) for r in loads]
        assert loads[int(np.argmax(power))] == pytest.approx(best, rel=2e-3)
