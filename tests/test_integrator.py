"""The compiled RK4 ensemble integrator against scipy's DOP853 and against energy conservation."""

import math
import os
import subprocess
import sys

import numpy as np
import pytest
from scipy.integrate import solve_ivp

from harvester.dynamics.integrator import (
    FLAG_DIVERGED,
    FLAG_OK,
    FLAG_TRAVEL,
    advance_with_input,
    new_input_stats,
    simulate_tone,
)
from harvester.model import CoilCircuit, PiezoCircuit, ReducedModel, analyse_wells

# A small bistable beam (SI): wells at ±√(60/6e6) = ±3.16 mm, well frequency 17.4 Hz.
BEAM = dict(mass_kg=0.01, damping_N_s_per_m=0.03, stiffness=(-60.0, 6.0e6), forcing_mass_kg=0.012)
X_WELL = math.sqrt(60.0 / 6.0e6)
MODELS = {
    "piezo": ReducedModel(**BEAM, transducer=PiezoCircuit(8e-4, 5e-8), load_ohm=1.6e5),
    # L/R = 3.3 ms, longer than a step: the current is integrated as a state
    "coil with inductance": ReducedModel(**BEAM, transducer=CoilCircuit(2.0, 50.0, 0.5),
                                         load_ohm=100.0),
    # L = 0: the coil is a viscous damper (Bl)²/(R_c + R_l) (harvester/METHODS.md §2)
    "resistive coil": ReducedModel(**BEAM, transducer=CoilCircuit(2.0, 50.0, 0.0),
                                   load_ohm=100.0),
    # a 4-term odd force like the fitted magnet forces (k5, k7 add a third to F at 5 mm):
    # the kernels are compiled per number of terms, so this is a separate code path
    "piezo, 4-term force": ReducedModel(**{**BEAM, "stiffness": (-60.0, 6.0e6, 1.0e11, -2.0e15)},
                                        transducer=PiezoCircuit(8e-4, 5e-8), load_ohm=1.6e5),
    # unequal wells: a constant force k0 and a quadratic term k2 move the saddle to 0.17 mm and
    # the wells to −4.7 and +2.0 mm (barriers 498 and 37 µJ), another code path again
    "piezo, unequal wells": ReducedModel(**BEAM, even_stiffness=(0.01, 1.5e4),
                                         transducer=PiezoCircuit(8e-4, 5e-8), load_ohm=1.6e5),
}


def reference_solution(model: ReducedModel, accel, t_span, y0, t_eval, max_step=np.inf):
    """The reduced model's equations written out from the record's physical fields, solved by
    scipy's DOP853 at rtol 1e-10 (Hairer, Nørsett & Wanner 1993, Solving ODEs I, §II.10)."""
    m, c, mf = model.mass_kg, model.damping_N_s_per_m, model.forcing_mass_kg

    def force(x):
        return (sum(k * x ** (2 * j + 1) for j, k in enumerate(model.stiffness))
                + sum(k * x ** (2 * j) for j, k in enumerate(model.even_stiffness)))

    t = model.transducer
    if isinstance(t, PiezoCircuit):
        theta, cap, r = t.coupling_N_per_V, t.capacitance_F, model.load_ohm

        def rhs(time, y):
            x, v, volts = y
            return [v, (-c * v - force(x) - theta * volts - mf * accel(time)) / m,
                    (theta * v - volts / r) / cap]
    elif t is not None and t.inductance_H > 0.0:
        bl, ind, r = t.flux_linkage_V_s_per_m, t.inductance_H, t.resistance_ohm + model.load_ohm

        def rhs(time, y):
            x, v, amps = y
            return [v, (-c * v - force(x) - bl * amps - mf * accel(time)) / m,
                    (bl * v - r * amps) / ind]
    else:
        c_e = 0.0 if t is None else t.flux_linkage_V_s_per_m**2 / (t.resistance_ohm
                                                                  + model.load_ohm)

        def rhs(time, y):
            x, v = y
            return [v, (-(c + c_e) * v - force(x) - mf * accel(time)) / m]

        y0 = y0[:2]
    sol = solve_ivp(rhs, t_span, y0, method="DOP853", rtol=1e-10, atol=1e-14, t_eval=t_eval,
                    max_step=max_step)
    assert sol.success
    return sol.y


def start(model: ReducedModel) -> float:
    """x at rest in the right well [m]: X_WELL, or with unequal wells their right one."""
    return X_WELL if model.is_symmetric else analyse_wells(model).wells_m[1]


def tone_error(model, steps, amplitude=1.5, frequency=14.0, phase=0.3):
    """Largest displacement error over 5 strobe samples and the final state, in well units."""
    x0 = start(model)
    ens = simulate_tone(model, amplitude, frequency, x0, 0.0, 0.0, transient_periods=5,
                        strobe_periods=5, steps_per_period=steps, strobe_phase=phase)
    period = 1.0 / frequency
    t0 = phase / (2.0 * math.pi * frequency)
    t_eval = t0 + period * np.arange(5, 11)
    ref = reference_solution(model, lambda t: amplitude * math.cos(2 * math.pi * frequency * t),
                             (t0, t_eval[-1]), [x0, 0.0, 0.0], t_eval)
    got = np.append(ens.strobe_x_m[0], ens.x_m[0])
    assert ens.flag[0] == FLAG_OK
    return float(np.max(np.abs(got - ref[0]))) / X_WELL


@pytest.mark.parametrize("name", list(MODELS))
def test_tone_matches_dop853_with_fourth_order_convergence(name):
    # Classical RK4 is fourth order (Hairer, Nørsett & Wanner 1993, §II.1): halving the step
    # divides the global error by 2⁴ = 16.  An intrawell orbit (no sensitive dependence).
    coarse, fine = tone_error(MODELS[name], 64), tone_error(MODELS[name], 128)
    assert fine < 2e-6
    assert 11.0 < coarse / fine < 22.0


def test_strobe_samples_the_circuit_variable():
    model = MODELS["piezo"]
    amplitude, frequency = 1.5, 14.0
    ens = simulate_tone(model, amplitude, frequency, X_WELL, 0.0, 0.0, transient_periods=3,
                        strobe_periods=2)
    t_eval = np.array([3.0, 4.0, 5.0]) / frequency
    ref = reference_solution(model, lambda t: amplitude * math.cos(2 * math.pi * frequency * t),
                             (0.0, t_eval[-1]), [X_WELL, 0.0, 0.0], t_eval)
    scale = np.max(np.abs(ref[2]))
    got = np.append(ens.strobe_q[0], ens.q[0])
    assert np.max(np.abs(got - ref[2])) < 1e-5 * scale
    np.testing.assert_allclose(np.append(ens.strobe_v_mps[0], ens.v_mps[0]), ref[1],
                               atol=1e-5 * np.max(np.abs(ref[1])))


def broadband(t):
    """A smooth test input [m/s²]: three incommensurate tones."""
    return (2.0 * np.cos(2 * np.pi * 11.0 * t + 0.3) + 1.2 * np.cos(2 * np.pi * 17.3 * t + 1.1)
            + 0.8 * np.cos(2 * np.pi * 29.1 * t + 2.0))


@pytest.mark.parametrize("name", list(MODELS))
def test_sampled_input_matches_dop853(name):
    model = MODELS[name]
    dt, m, blocks = 1.0 / 2000.0, 50, 4
    state = np.array([[X_WELL, 0.0, 0.0]])
    stats = new_input_stats(1)
    for b in range(blocks):
        # overlapping blocks: the last half-step sample is the next block's first
        t = (b * m + 0.5 * np.arange(2 * m + 1)) * dt
        advance_with_input(model, state, broadband(t)[None, :], dt, stats)
    t_end = blocks * m * dt
    ref = reference_solution(model, broadband, (0.0, t_end), [X_WELL, 0.0, 0.0], [t_end])
    assert stats.flag[0] == FLAG_OK
    assert abs(state[0, 0] - ref[0, -1]) < 1e-7 * X_WELL
    assert abs(state[0, 1] - ref[1, -1]) < 1e-6 * X_WELL * 2 * np.pi * 17.4
    assert stats.time_total_s[0] == pytest.approx(t_end, rel=1e-12)
    # the range tallies see x and ẋ at every step end: the same as DOP853 at those instants
    steps = np.arange(blocks * m + 1) * dt
    x, v = reference_solution(model, broadband, (0.0, t_end), [X_WELL, 0.0, 0.0], steps)[:2]
    assert stats.x_min_m[0] == pytest.approx(x.min(), abs=1e-7 * X_WELL)
    assert stats.x_max_m[0] == pytest.approx(x.max(), abs=1e-7 * X_WELL)
    assert stats.max_abs_v_mps[0] == pytest.approx(np.abs(v).max(), rel=1e-6)


@pytest.mark.parametrize("name, amplitudes", [("piezo", (6.0, 12.0, 20.0)),
                                              ("coil with inductance", (6.0, 12.0, 20.0)),
                                              ("piezo, unequal wells", (12.0, 16.0, 20.0))])
def test_tone_energy_balance(name, amplitudes):
    # Power balance of the reduced model (harvester/METHODS.md §4): d/dt(½mẋ² + U + ½a q²)
    # = −m_f a ẋ − c ẋ² − h q², so the mean input power equals the mechanical and electrical
    # losses plus the change of stored energy over the window, here to 1 %.  Hopping orbits
    # (with unequal wells U carries the even terms too).
    ens = simulate_tone(MODELS[name], np.array(amplitudes), 14.0, start(MODELS[name]), 0.0, 0.0,
                        transient_periods=20, strobe_periods=60)
    assert np.all(ens.flag == FLAG_OK)
    assert np.all(ens.hops > 0)
    out = (ens.mean_mech_loss_W + ens.mean_elec_loss_W
           + ens.stored_energy_change_J / ens.averaging_time_s)
    np.testing.assert_allclose(ens.mean_input_power_W, out, rtol=0.01)
    assert np.all(ens.mean_elec_loss_W > 0.05 * ens.mean_input_power_W)


@pytest.mark.parametrize("name", ["coil with inductance", "piezo, unequal wells"])
def test_sampled_input_energy_balance(name):
    # as for the tone: input work = mechanical and electrical losses + change of stored energy
    # ½mẋ² + U(x) + ½a_c q² (a_c = L_c or C_p), here to 1 %, with U from all the force's terms
    model = MODELS[name]
    n, dt, m = 3, 1.0 / 2000.0, 400
    state = np.column_stack((np.full(n, X_WELL), np.zeros(n), np.zeros(n)))
    stats = new_input_stats(n)
    gain = np.array([1.0, 4.0, 8.0])[:, None]
    lag = model.circuit_coefficients()[0]
    state[:, 0] = start(model)

    def stored(s):
        x, v, q = s[:, 0], s[:, 1], s[:, 2]
        return 0.5 * model.mass_kg * v**2 + model.potential_energy(x) + 0.5 * lag * q**2

    e0 = stored(state)
    for b in range(3):
        t = (b * m + 0.5 * np.arange(2 * m + 1)) * dt
        advance_with_input(model, state, gain * broadband(t)[None, :], dt, stats)
    out = stats.mech_loss_J + stats.elec_loss_J + stored(state) - e0
    np.testing.assert_allclose(stats.input_work_J, out, rtol=0.01)
    if isinstance(model.transducer, CoilCircuit):
        # the load takes R_l/(R_c + R_l) of the electrical loss
        np.testing.assert_allclose(stats.energy_load_J, stats.elec_loss_J * 100.0 / 150.0,
                                   rtol=1e-12)


def test_travel_limit_flags_and_freezes():
    model = ReducedModel(**BEAM, transducer=PiezoCircuit(8e-4, 5e-8), load_ohm=1.6e5,
                         travel_limit_m=1.3 * X_WELL)
    ens = simulate_tone(model, np.array([0.5, 20.0]), 14.0, X_WELL, 0.0, transient_periods=10,
                        strobe_periods=10)
    assert list(ens.flag) == [FLAG_OK, FLAG_TRAVEL]
    for field in ("x_m", "v_mps", "q", "mean_load_power_W", "strobe_x_m", "max_abs_x_m"):
        assert np.all(np.isfinite(getattr(ens, field)))
    # frozen at the start of the period in which it passed the limit
    assert abs(ens.x_m[1]) <= 1.3 * X_WELL


def test_divergence_flags_instead_of_nan():
    # a softening quintic term makes the potential fall away beyond |x| ≈ 1.5 wells: driven
    # hard, the beam escapes to infinity
    model = ReducedModel(mass_kg=1.0, damping_N_s_per_m=0.1, stiffness=(-1.0, 1.0, -0.2),
                         forcing_mass_kg=1.0)
    ens = simulate_tone(model, np.array([0.05, 3.0]), 0.15, 1.0, 0.0, transient_periods=20,
                        strobe_periods=5)
    assert list(ens.flag) == [FLAG_OK, FLAG_DIVERGED]
    assert np.all(np.isfinite(ens.x_m)) and np.all(np.isfinite(ens.mean_input_power_W))
    state = np.array([[1.0, 0.0, 0.0], [1.0, 0.0, 0.0]])
    stats = new_input_stats(2)
    accel = np.array([[0.05], [3.0]]) * np.cos(0.15 * 2 * np.pi * 0.01 * np.arange(8001))
    advance_with_input(model, state, accel, 0.02, stats)
    assert list(stats.flag) == [FLAG_OK, FLAG_DIVERGED]
    assert np.all(np.isfinite(state))


def test_hops_count_settled_well_changes():
    # Hops are changes of the well the beam has settled in (energy below −½ΔU inside it);
    # bare zero crossings over-count recrossings at light damping (harvester/METHODS.md §7).
    # Reference: the same criterion applied to a DOP853 trajectory of the unit double well
    # u'' + 0.1u' − u + u³ = −a(t) (ΔU = 1/4; Kovacic & Brennan 2011, The Duffing Equation,
    # ch. 1), kicked by eight velocity pulses of either sign, some strong enough to cross the
    # barrier several times before settling.
    model = ReducedModel(mass_kg=1.0, damping_N_s_per_m=0.1, stiffness=(-1.0, 1.0),
                         forcing_mass_kg=1.0)
    times = 10.0 + 40.0 * np.arange(8)
    kicks = np.array([1.0, -1.3, 1.6, 1.9, -1.2, -1.5, 2.2, -1.1])  # ∫a dt of each pulse

    def pulses(t):
        t = np.asarray(t, dtype=float)[..., None]
        return np.sum(kicks / (0.4 * math.sqrt(math.pi)) * np.exp(-(((t - times) / 0.4) ** 2)),
                      axis=-1)

    dt, m = 0.01, 33000
    state = np.array([[1.0, 0.0, 0.0]])
    stats = new_input_stats(1)
    advance_with_input(model, state, pulses(0.5 * dt * np.arange(2 * m + 1))[None, :], dt,
                       stats, settle_fraction=0.5)
    t = dt * np.arange(1, m + 1)
    # a step cap so that no pulse falls between two steps of the reference
    x, v = reference_solution(model, pulses, (0.0, t[-1]), [1.0, 0.0, 0.0], t, max_step=0.1)
    energy = 0.5 * v**2 + model.potential_energy(x)
    settled = np.where(energy < -0.5 * 0.25, np.sign(x), 0)
    wells = settled[settled != 0]
    expected = int(np.count_nonzero(np.diff(wells)))
    crossings = int(np.count_nonzero(np.diff(np.sign(x))))
    assert expected >= 3
    assert stats.hops[0] == expected
    assert crossings > 2 * expected
    assert stats.settled_well[0] == wells[-1]
    assert stats.time_in_well_pos_s[0] + stats.time_in_well_neg_s[0] == pytest.approx(t[-1])


def test_monostable_model_never_hops():
    model = ReducedModel(mass_kg=1.0, damping_N_s_per_m=0.02, stiffness=(1.0, 1.0),
                         forcing_mass_kg=1.0)
    state = np.array([[0.0, 3.0, 0.0]])
    stats = new_input_stats(1)
    advance_with_input(model, state, np.zeros((1, 2001)), 0.01, stats)
    ens = simulate_tone(model, 2.0, 0.2, 0.0, 0.0, transient_periods=2, strobe_periods=4)
    assert stats.hops[0] == 0 and stats.settled_well[0] == 0
    assert ens.hops[0] == 0 and ens.zero_crossings[0] > 0


@pytest.mark.parametrize("name", ["piezo", "piezo, 4-term force"])
def test_window_deflection_range_matches_dop853(name):
    # the lowest and highest x over the strobe window, tracked at every step, against DOP853
    # sampled densely over the same window (Hairer, Nørsett & Wanner 1993, §II.10); RK4 sees x
    # at step ends only, so it can miss a peak by (ω h)²/8 of the swing (< 1e-4 here)
    model, amplitude, frequency, phase = MODELS[name], 1.5, 14.0, 0.3
    ens = simulate_tone(model, amplitude, frequency, X_WELL, 0.0, 0.0, transient_periods=5,
                        strobe_periods=5, steps_per_period=256, strobe_phase=phase)
    t0 = phase / (2.0 * math.pi * frequency)
    t_eval = t0 + np.linspace(5.0, 10.0, 20001) / frequency
    x = reference_solution(model, lambda t: amplitude * math.cos(2 * math.pi * frequency * t),
                           (t0, t_eval[-1]), [X_WELL, 0.0, 0.0], t_eval)[0]
    assert x.min() > 0.0  # an intrawell orbit: one-sided, so x_min is not −max|x|
    assert ens.x_min_m[0] == pytest.approx(x.min(), abs=2e-4 * X_WELL)
    assert ens.x_max_m[0] == pytest.approx(x.max(), abs=2e-4 * X_WELL)
    assert ens.max_abs_x_m[0] == pytest.approx(max(x.max(), -x.min()), abs=2e-4 * X_WELL)
    v = reference_solution(model, lambda t: amplitude * math.cos(2 * math.pi * frequency * t),
                           (t0, t_eval[-1]), [X_WELL, 0.0, 0.0], t_eval)[1]
    assert ens.max_abs_v_mps[0] == pytest.approx(np.abs(v).max(), rel=2e-4)


FRESH_OR_CACHED = """
import numpy as np
from harvester.dynamics.integrator import simulate_tone
from harvester.model import ReducedModel
rng = np.random.default_rng(1)
n = 100
model = ReducedModel(mass_kg=1.0, damping_N_s_per_m=0.25, stiffness=(-1.0, 1.0),
                     forcing_mass_kg=1.0)
ens = simulate_tone(model, rng.uniform(0.1, 0.4, n), 1 / (2 * np.pi), rng.uniform(-1.5, 1.5, n),
                    rng.uniform(-1.0, 1.0, n), transient_periods=30, strobe_periods=4)
print(ens.x_m.tobytes().hex())
"""


def test_fresh_and_cached_kernels_give_the_same_bits(tmp_path):
    # `--seed` promises the same answer every run; chaotic trajectories (the canonical double
    # well at γ up to 0.4, δ = 0.25, ω = 1) amplify a last-bit difference to a visible one, so
    # the kernel compiled in this run and numba's cached copy of it must round alike
    env = {**os.environ, "NUMBA_CACHE_DIR": str(tmp_path)}
    runs = [subprocess.run([sys.executable, "-c", FRESH_OR_CACHED], capture_output=True,
                           text=True, env=env, timeout=600) for _ in range(2)]
    assert all(r.returncode == 0 for r in runs), runs[0].stderr + runs[1].stderr
    assert any(tmp_path.rglob("*.nbc"))  # the second run had a cache to load
    assert runs[0].stdout == runs[1].stdout
