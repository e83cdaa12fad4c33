"""Response envelopes that feed the safety checks: deflection range and coil open-circuit EMF."""

import math

import pytest

from harvester.analysis.operating import coil_peak_emf
from harvester.model import CoilCircuit, ReducedModel

# A linear coil harvester (SI): k = 400 N/m, m = 10 g, c = 0.02 N·s/m, Bl = 2 V·s/m,
# R_c = 50 Ω, R_l = 100 Ω, no inductance: c_e = (Bl)²/(R_c + R_l) = 0.0267 N·s/m.
MASS, STIFFNESS, DAMPING, FORCING = 0.01, 400.0, 0.02, 0.012
MODEL = ReducedModel(mass_kg=MASS, damping_N_s_per_m=DAMPING, stiffness=(STIFFNESS,),
                     forcing_mass_kg=FORCING, transducer=CoilCircuit(2.0, 50.0, 0.0),
                     load_ohm=100.0)
C_E = 2.0**2 / 150.0
F_N = math.sqrt(STIFFNESS / MASS) / (2.0 * math.pi)


def test_tone_emf_is_the_open_circuit_resonant_emf():
    # At resonance the velocity amplitude is m_f A/c_total (Williams & Yates 1996, Sens.
    # Actuators A 52:8): loaded m_f A/(c + c_e), open m_f A/c.  From the loaded peak speed the
    # estimate must give the open-circuit EMF Bl·m_f A/c exactly.
    amplitude = 3.0
    loaded_speed = FORCING * amplitude / (DAMPING + C_E)
    assert coil_peak_emf(MODEL, loaded_speed, F_N, broadband=False) == pytest.approx(
        2.0 * FORCING * amplitude / DAMPING, rel=1e-12)


def test_broadband_emf_follows_the_white_noise_velocity_variance():
    # White base acceleration of one-sided PSD G: c_total E[ẋ²] = m_f² G/(4m) (Caughey 1963,
    # J. Acoust. Soc. Am. 35:1706; Halvorsen 2008, J. Microelectromech. Syst. 17:1061), so a
    # peak of k standard deviations of the loaded speed maps to k open-circuit deviations.
    g_psd, crest = 0.5, 4.0
    loaded = math.sqrt(FORCING**2 * g_psd / (4.0 * MASS * (DAMPING + C_E)))
    opened = math.sqrt(FORCING**2 * g_psd / (4.0 * MASS * DAMPING))
    assert coil_peak_emf(MODEL, crest * loaded, F_N, broadband=True) == pytest.approx(
        2.0 * crest * opened, rel=1e-12)


def test_no_coil_no_emf():
    piezo_free = ReducedModel(mass_kg=MASS, damping_N_s_per_m=DAMPING, stiffness=(STIFFNESS,),
                              forcing_mass_kg=FORCING)
    assert coil_peak_emf(piezo_free, 1.0, F_N, broadband=False) is None
