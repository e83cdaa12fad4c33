"""Basin maps: attractors of published double wells, basin stability that converges with the
grid, and the command's JSON."""

from __future__ import annotations

import json
import math
import subprocess
import sys
from pathlib import Path

import numpy as np
import pytest

from harvester.analysis.basins import basin_map, basin_region, high_power_share
from harvester.dynamics.orbits import CHAOTIC, INTERWELL_PERIODIC, INTRAWELL
from harvester.model import ReducedModel

ROOT = Path(__file__).resolve().parent.parent
UNIT_WELL = ROOT / "tests" / "data" / "unit-double-well.toml"


def canonical(delta: float) -> ReducedModel:
    """u'' + δu' − u + u³ = γ cos ωτ as a reduced model (m = 1, k1 = −1, k3 = 1)."""
    return ReducedModel(mass_kg=1.0, damping_N_s_per_m=delta, stiffness=(-1.0, 1.0),
                        forcing_mass_kg=1.0)


def test_basin_shares_converge_as_the_grid_is_refined():
    # δ = 0.15, γ = 0.25, ω = 0.9: small period-1 orbits in each well and the large period-1
    # interwell orbit coexist.  Basin stability S_B estimated from N starts carries the
    # binomial sampling error √(S_B(1 − S_B)/N) (Menck et al. 2013, Nat. Phys. 9:89): each
    # share from 200² starts lies within 1.96 of those errors (95 %) of its share from 100²
    model = canonical(0.15)
    coarse, fine = (basin_map(model, 0.25, 0.9 / (2 * math.pi), points=n) for n in (100, 200))
    kinds = {(o.kind, o.well, o.period) for o in fine.orbits if o.share > 0.01}
    assert kinds == {(INTRAWELL, 1, 1), (INTRAWELL, -1, 1), (INTERWELL_PERIODIC, 0, 1)}
    for f in fine.orbits:
        if f.share < 0.01:
            continue
        c = max((c for c in coarse.orbits if (c.kind, c.well, c.period) == (f.kind, f.well,
                                                                            f.period)),
                key=lambda c: c.share)
        assert abs(f.share - c.share) <= 1.96 * c.standard_error
        assert f.standard_error == pytest.approx(math.sqrt(f.share * (1 - f.share) / 200**2))
    assert sum(o.share for o in fine.orbits) == pytest.approx(1.0 - fine.flagged_share)
    # the map: its cells name the attractors by rank, largest basin first, and the share is
    # the fraction of the cells
    assert fine.rank.shape == (200, 200)
    for rank, orbit in enumerate(fine.orbits):
        assert np.mean(fine.rank == rank) == pytest.approx(orbit.share)
    # the region is the one the orbit mix of `power` draws its starts from: |x| ≤ 1.5 x_w,
    # |ẋ| ≤ ω_w x_w, with x_w = 1 and ω_w = √2 for the unit double well (Kovacic & Brennan
    # 2011, The Duffing Equation, ch. 1)
    x_half, v_half = basin_region(model, 0.25)
    assert (x_half, v_half) == pytest.approx((1.5, math.sqrt(2.0)))
    assert fine.x_m[0] == pytest.approx(-1.5 + 1.5 / 200)


def test_chaotic_attractor_fills_the_map_and_is_confirmed_by_its_exponent():
    # δ = 0.25, ω = 1, γ = 0.3: one chaotic attractor, λ ≈ +0.12 per unit time (textbooks on
    # chaos, common practice (memory)): every start ends on it
    found = basin_map(canonical(0.25), 0.3, 1.0 / (2 * math.pi), points=30)
    (orbit,) = found.orbits
    assert orbit.kind == CHAOTIC and orbit.share == pytest.approx(1.0)
    assert orbit.lyapunov_per_s == pytest.approx(0.12, abs=0.025)


def test_high_power_side_counts_the_orbits_within_half_the_best():
    from types import SimpleNamespace as Orbit

    orbits = [Orbit(share=0.5, mean_power_W=1e-6), Orbit(share=0.3, mean_power_W=9e-5),
              Orbit(share=0.2, mean_power_W=1e-4)]
    assert high_power_share(orbits) == pytest.approx(0.5)
    assert high_power_share([Orbit(share=1.0, mean_power_W=0.0)]) is None


def test_basins_command_json_carries_shares_and_the_map():
    result = subprocess.run(
        [sys.executable, "-m", "harvester", "basins", str(UNIT_WELL), "--amplitude",
         "0.25 m/s^2", "--frequency", "0.1432 Hz", "--points", "24", "--format", "json"],
        capture_output=True, text=True, timeout=300, cwd=ROOT)
    assert result.returncode == 0, result.stderr
    data = json.loads(result.stdout)
    assert data["starts_count"] == 24 * 24
    assert len(data["grid"]["rank"]) == 24 and len(data["grid"]["x_m"]) == 24
    shares = [a["share"] for a in data["attractors"]]
    assert sum(shares) == pytest.approx(1.0 - data["flagged_share"])
    for a in data["attractors"]:
        low, high = a["ci95_share"]
        assert low <= a["share"] <= high
    bad = subprocess.run([sys.executable, "-m", "harvester", "basins",
                          str(ROOT / "tests" / "data" / "resistive-coil-band.toml")],
                         capture_output=True, text=True, timeout=300, cwd=ROOT)
    assert bad.returncode == 2 and "--frequency" in bad.stderr
