"""Material data: plane-stress piezo constants and units, against the published tables."""

from __future__ import annotations

import pytest

from harvester.materials import all_materials, find_material


@pytest.mark.parametrize(
    "key, c11_GPa, e31, eps33S_nF_per_m",
    [
        # Erturk & Inman (2011), Piezoelectric Energy Harvesting, Wiley, App. E (table of
        # plane-stress constants): PZT-5A 61.0 GPa, −10.4 C/m², 13.3 nF/m
        ("pzt-5a", 61.0, -10.4, 13.3),
        # same table: PZT-5H 60.6 GPa, −16.6 C/m², 25.55 nF/m
        ("pzt-5h", 60.6, -16.6, 25.55),
    ],
)
def test_plane_stress_piezo_constants(key, c11_GPa, e31, eps33S_nF_per_m):
    mat = find_material(key, "piezo")
    # the table rounds to three figures: 0.5 % covers the rounding
    assert mat.youngs_modulus_Pa == pytest.approx(c11_GPa * 1e9, rel=5e-3)
    assert mat.e31_C_per_m2 == pytest.approx(e31, rel=5e-3)
    assert mat.permittivity_S_F_per_m == pytest.approx(eps33S_nF_per_m * 1e-9, rel=5e-3)


def test_substrate_values_from_the_handbook():
    # ASM Handbook Vol. 2 (1990), 6061-T6: E 68.9 GPa, ρ 2700 kg/m³, S_ut 310 MPa, fatigue 96.5 MPa
    al = find_material("Al 6061-T6", "substrate")
    assert al.youngs_modulus_Pa == pytest.approx(68.9e9)
    assert al.get("density") == pytest.approx(2700.0)
    assert al.get("ultimate_strength") == pytest.approx(310e6)
    assert al.get("fatigue_strength") == pytest.approx(96.5e6)
    assert al.fatigue_cycles == pytest.approx(5e8)


@pytest.mark.parametrize("grade, low, high", [("N35", 1.17, 1.22), ("N42", 1.28, 1.32),
                                              ("N52", 1.42, 1.48)])
def test_ndfeb_remanence_within_grade_range(grade, low, high):
    # typical sintered NdFeB grade ranges (IEC 60404-8-1; ASTM A1101; common practice)
    assert low <= find_material(grade, "magnet").get("remanence") <= high


def test_every_value_has_a_source_and_lookup_suggests():
    for mat in all_materials().values():
        assert set(mat.sources) == set(mat.values)
        assert all(s.strip() for s in mat.sources.values())
    with pytest.raises(KeyError, match="did you mean 'pzt-5a'"):
        find_material("pzt-5a-x", "piezo")


def test_installed_package_ships_the_material_files(tmp_path):
    # run outside the source tree so that the installed harvester (not the checkout) is imported
    import subprocess
    import sys

    code = ("import harvester.materials as m; from importlib import resources; "
            "print(len(m.all_materials()), resources.files('harvester.materials_data'))")
    done = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True,
                          cwd=tmp_path, timeout=120)
    assert done.returncode == 0, done.stderr
    count = int(done.stdout.split()[0])
    assert count == len(all_materials()) >= 12


def test_the_second_sn_point_must_lie_on_a_falling_line():
    # an S–N line falls with life (Basquin 1910, Proc. ASTM 10:625): a "short-life" strength
    # below the long-life one, or at more cycles, is an error naming the key
    from harvester.errors import CaseError
    from harvester.materials import _parse

    base = """kind = "substrate"
[properties]
density = { value = "2700 kg/m^3", source = "s" }
youngs_modulus = { value = "69 GPa", source = "s" }
ultimate_strength = { value = "310 MPa", source = "s" }
fatigue_strength = { value = "96.5 MPa", cycles = 5e8, source = "s" }
"""
    good = _parse("x", base + 'short_life_fatigue_strength = { value = "279 MPa", cycles = 1e3, '
                  'source = "s" }\n', "x.toml")
    assert good.sn_points == ((1e3, 279e6), (5e8, 96.5e6))
    for bad in ('{ value = "90 MPa", cycles = 1e3, source = "s" }',
                '{ value = "279 MPa", cycles = 1e9, source = "s" }'):
        with pytest.raises(CaseError, match="short_life_fatigue_strength"):
            _parse("x", base + f"short_life_fatigue_strength = {bad}\n", "x.toml")
