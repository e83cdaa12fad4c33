"""`harvester spread`: sampling the build tolerances and the statistics of the spread.

References used here:
- Clopper & Pearson (1934), Biometrika 26:404: the exact binomial interval; scipy.stats
  `binomtest(...).proportion_ci(method="exact")` is the test-only reference.
- The normal distribution: a build is bistable exactly when its gap lies below the critical
  gap g_c, so with a normal gap of mean g0 and standard deviation σ the share of bistable
  builds is Φ((g_c − g0)/σ) (scipy.stats.norm).
- The standard error of a mean, s/√N (any statistics text, e.g. Montgomery & Runger 2014,
  *Applied Statistics and Probability for Engineers*, 6th ed., Wiley, §7.3, memory): four
  times the builds halve it, and halve the binomial interval's width.
The case tests/data/tolerant-tone.toml is invented test geometry, never a check value.
"""

from __future__ import annotations

import json
import math
from pathlib import Path

import numpy as np
import pytest
from scipy.stats import binomtest, norm

from harvester.analysis.tolerances import (
    binomial_interval,
    draw_values,
    rank_correlation,
    resolve_tolerances,
)
from harvester.build import build
from harvester.case.load import load_case, parse_case
from harvester.commands.records import json_value
from harvester.commands.spread import spread_result
from harvester.errors import CaseError

DATA = Path(__file__).resolve().parent / "data"
TOLERANT = DATA / "tolerant-tone.toml"


def variant(tmp_path: Path, tolerances: str, *, environment: bool = False,
            gap: str | None = None) -> Path:
    """The test case with other [tolerances] (and without its temperature range)."""
    text = TOLERANT.read_text()
    head, _, _ = text.partition("[environment]")
    limits = text[text.index("[limits]"):]
    if gap is not None:
        head = head.replace('gap = "8 mm"', f'gap = "{gap}"')
    extra = '[environment]\ntemperature = { min = "0 degC", max = "40 degC" }\n' \
        if environment else ""
    path = tmp_path / "variant.toml"
    path.write_text(head + extra + "[tolerances]\n" + tolerances + "\n" + limits)
    return path


@pytest.mark.parametrize("events, trials", [(0, 30), (3, 30), (17, 40), (40, 40), (1, 500)])
def test_binomial_interval_is_clopper_pearson(events, trials):
    # scipy's exact (Clopper–Pearson) interval, rel 1e-9 (both invert the beta distribution)
    reference = binomtest(events, trials).proportion_ci(confidence_level=0.95, method="exact")
    assert binomial_interval(events, trials) == pytest.approx(
        (reference.low, reference.high), rel=1e-9, abs=1e-12)


def test_rank_correlation_is_spearmans():
    # a monotonic relation has ρ = 1 whatever its shape; a constant quantity has none
    x = np.linspace(1.0, 2.0, 20)
    assert rank_correlation(x, np.exp(5 * x)) == pytest.approx(1.0)
    assert rank_correlation(x, -x**3) == pytest.approx(-1.0)
    assert rank_correlation(x, np.ones_like(x)) is None
    # without ties ρ = 1 − 6 Σd²/(n(n² − 1)), d the rank differences (Spearman 1904): here
    # Σd² = 12 over n = 10, ρ = 1 − 72/990, to rounding (rel 1e-12); an undefined build drops out
    x = np.array([0.3, 1.1, 1.9, 2.2, 3.5, 4.0, 5.2, 6.8, 7.1, 9.0, 9.5])
    y = np.array([2.0, 1.0, 4.0, 3.0, 5.0, 8.0, 6.0, 7.0, 10.0, 9.0, np.nan]) ** 3
    assert rank_correlation(x, y) == pytest.approx(1.0 - 72.0 / 990.0, rel=1e-12)


def test_draws_follow_their_distributions(tmp_path):
    # normal: mean and sd; uniform ±h: inside the bounds, sd h/√3 (4 standard errors of each)
    path = variant(tmp_path, '"fixed_magnet.gap" = { sd = "0.1 mm" }\n'
                             '"beam.width" = { uniform = "0.2 mm" }')
    tolerances = resolve_tolerances(load_case(path))
    values = draw_values(tolerances, 4000, seed=3)
    gap, width = values[:, 0], values[:, 1]
    assert gap.mean() == pytest.approx(8e-3, abs=4 * 1e-4 / math.sqrt(4000))
    assert gap.std() == pytest.approx(1e-4, rel=4 / math.sqrt(2 * 4000))
    assert np.all(np.abs(width - 15e-3) <= 2e-4)
    assert width.std() == pytest.approx(2e-4 / math.sqrt(3), rel=0.05)
    assert np.array_equal(values, draw_values(tolerances, 4000, seed=3))


def test_zero_tolerances_collapse_to_the_nominal_result(tmp_path):
    path = variant(tmp_path, '"fixed_magnet.gap" = { sd = "0 mm" }\n'
                             '"tip_magnet.remanence" = { uniform = "0 %" }\n'
                             '"losses.damping_ratio" = { sd = "0 %" }')
    result = spread_result(load_case(path), samples=5, subsample=0, magnet_model="dipole")
    nominal = result.nominal
    for row in result.samples:
        for key in ("regime", "barrier_J", "onset_mps2", "hops", "mean_power_W",
                    "worst_margin", "check_fails"):
            assert getattr(row, key) == getattr(nominal, key), key
    for q in result.quantities:
        assert q.p05_SI == q.p50_SI == q.p95_SI == q.mean_SI == q.nominal_SI or \
            q.defined_count == 0
    for p in (result.probability_bistable, result.probability_no_hop,
              result.probability_check_fails):
        assert p.probability in (0.0, 1.0)
    for s in result.sensitivity:
        assert all(e.rank_correlation is None for e in s.effects)
        assert all(e.oat_change_SI in (0.0, None) for e in s.effects)


def test_share_of_bistable_builds_under_a_normal_gap(tmp_path):
    # only the gap scatters: bistable ⇔ gap < g_c, so the share is Φ((g_c − g0)/σ); the
    # sampled share's exact 95 % interval must contain it
    probe = variant(tmp_path, '"fixed_magnet.gap" = { sd = "0.1 mm" }')
    critical = build(load_case(probe), magnet_model="dipole").critical_gap_m
    sigma = 0.4e-3
    g0 = critical + 0.3 * sigma
    path = variant(tmp_path, f'"fixed_magnet.gap" = {{ sd = "{sigma * 1e3} mm" }}',
                   gap=f"{g0 * 1e3} mm")
    result = spread_result(load_case(path), samples=400, subsample=0, statics_only=True,
                           magnet_model="dipole")
    expected = norm.cdf((critical - g0) / sigma)
    low, high = result.probability_bistable.ci95_probability
    assert low <= expected <= high
    assert result.probability_bistable.samples_count == 400


def test_standard_error_shrinks_like_one_over_root_n(tmp_path):
    # four times the builds halve the standard error of the mean barrier (all builds deep in
    # the double well, the barrier about linear in a uniform remanence: the sample standard
    # deviation of 100 builds scatters by about 5 %, so 20 %) and the width of the binomial
    # interval of a share near one half (its half-width ∝ √(p(1 − p)/N))
    options = dict(seed=11, subsample=0, statics_only=True, magnet_model="dipole")
    deep = load_case(variant(tmp_path, '"tip_magnet.remanence" = { uniform = "3 %" }'))
    small, large = (spread_result(deep, samples=n, **options) for n in (100, 400))
    ratio = (small.quantity("barrier_J").standard_error_SI
             / large.quantity("barrier_J").standard_error_SI)
    assert ratio == pytest.approx(2.0, rel=0.2)
    probe = variant(tmp_path, '"fixed_magnet.gap" = { sd = "0.1 mm" }')
    critical = build(load_case(probe), magnet_model="dipole").critical_gap_m
    edge = load_case(variant(tmp_path, '"fixed_magnet.gap" = { sd = "0.3 mm" }',
                             gap=f"{critical * 1e3} mm"))  # about half the builds bistable
    small, large = (spread_result(edge, samples=n, **options) for n in (100, 400))
    widths = [p.ci95_probability[1] - p.ci95_probability[0]
              for p in (small.probability_bistable, large.probability_bistable)]
    assert 0.3 < small.probability_bistable.probability < 0.7
    assert widths[0] / widths[1] == pytest.approx(2.0, rel=0.1)


def test_the_tolerance_that_moves_the_barrier_ranks_first(tmp_path):
    # the barrier falls steeply as the gap opens (k1 ∝ −1/g⁵ for dipoles, METHODS §3) and
    # hardly moves with 1 µm of width: the gap ranks first, with ρ near −1
    path = variant(tmp_path, '"beam.width" = { uniform = "0.001 mm" }\n'
                             '"fixed_magnet.gap" = { sd = "0.2 mm" }')
    result = spread_result(load_case(path), samples=60, subsample=0, statics_only=True,
                           magnet_model="dipole")
    top = result.sensitivity[0]
    assert top.tolerance == "fixed_magnet.gap" and top.rank == 1
    barrier = top.effects[0]
    assert barrier.rank_correlation < -0.95 and barrier.oat_change_SI < 0.0


def test_same_numbers_on_every_executor(tmp_path):
    loaded = load_case(TOLERANT)
    options = dict(samples=8, seed=5, subsample=0, statics_only=True, magnet_model="dipole")
    here = json_value(spread_result(loaded, **options))
    pool = json_value(spread_result(loaded, workers=2, **options))
    assert here == pool
    assert len({tuple(r["values_SI"]) for r in here["samples"]}) == 8


def test_a_temperature_range_is_sampled_as_a_tolerance(tmp_path):
    path = variant(tmp_path, '"fixed_magnet.gap" = { sd = "0.1 mm" }', environment=True)
    result = spread_result(load_case(path), samples=20, subsample=0, statics_only=True,
                           magnet_model="dipole")
    row = next(t for t in result.tolerances if t.tolerance == "environment.temperature")
    assert row.distribution == "uniform" and row.half_width_SI == pytest.approx(20.0)
    assert row.nominal_SI == pytest.approx(293.15)
    column = [t.tolerance for t in result.tolerances].index("environment.temperature")
    assert all(273.15 <= r.values_SI[column] <= 313.15 for r in result.samples)


def test_builds_that_cannot_exist_are_counted(tmp_path):
    path = variant(tmp_path, '"losses.damping_ratio" = { sd = "150 %" }')
    result = spread_result(load_case(path), samples=40, subsample=0, statics_only=True,
                           magnet_model="dipole")
    invalid = [r for r in result.samples if r.regime == "invalid"]
    assert invalid and result.invalid_count == len(invalid)
    assert all(r.check_fails for r in invalid)
    assert result.probability_check_fails.events_count >= len(invalid)
    assert any("cannot exist" in w for w in result.warnings)


@pytest.mark.parametrize("tolerances, key", [
    ('"beam.piezo.thickness" = { sd = "1 %" }\n"reduced.mass" = { sd = "1 %" }', None),
    ('"environment.temperature" = { sd = "2 K" }', "environment.temperature"),
])
def test_tolerances_the_case_cannot_take_are_bad_input(tmp_path, tolerances, key):
    if key is None:  # an unknown path: the schema refuses it when the case loads
        with pytest.raises(CaseError, match="reduced.mass"):
            load_case(variant(tmp_path, tolerances))
        return
    loaded = load_case(variant(tmp_path, tolerances, environment=True))
    with pytest.raises(CaseError, match="already a range") as caught:
        spread_result(loaded, samples=4, statics_only=True, magnet_model="dipole")
    assert caught.value.key == f"tolerances.{key}"


def test_a_case_without_tolerances_has_nothing_to_spread(tmp_path):
    text = TOLERANT.read_text()
    text = text[:text.index("[environment]")] + text[text.index("[limits]"):]
    path = tmp_path / "plain.toml"
    path.write_text(text)
    with pytest.raises(CaseError, match="no \\[tolerances\\]"):
        spread_result(parse_case(text, path), samples=4)


def test_the_reference_subsample_gets_the_full_power_and_every_check():
    result = spread_result(load_case(TOLERANT), samples=6, subsample=2, magnet_model="dipole")
    picked = [r for r in result.samples if r.reference_power_W is not None]
    assert len(picked) == 2 == result.reference.samples_count
    assert all(r.reference_check_fails is not None for r in picked)
    json.dumps(json_value(result))


def test_the_note_section_shows_shares_quantiles_ranking_and_every_build(tmp_path):
    from harvester.report.design_note import _spread_section

    loaded = load_case(TOLERANT)
    result = spread_result(loaded, samples=12, subsample=0, magnet_model="dipole",
                           one_at_a_time=False)
    assert all(e.oat_change_SI is None for s in result.sensitivity for e in s.effects)
    section = _spread_section(result)
    shares, quantities, ranking = section.tables
    assert [row[1] for row in shares.rows] == [result.probability_bistable.probability,
                                               result.probability_no_hop.probability,
                                               result.probability_check_fails.probability]
    assert [c.key for c in quantities.columns[1:]] == [q.quantity for q in result.quantities]
    median = next(row for row in quantities.rows if row[0] == "median build")
    assert median[1:] == [q.p50_SI for q in result.quantities]
    assert [row[1] for row in ranking.rows] == [s.tolerance for s in result.sensitivity]
    (figure,) = section.figures
    assert figure.alt.startswith("Strip plot: one marker per sampled build")
    assert result.sensitivity[0].tolerance in figure.svg


def test_a_reduced_case_spreads_over_its_damping(tmp_path):
    # the tolerance `calibrate` writes for a [reduced] case: 10 % of the damping, the double
    # well untouched (the barrier of u'' − u + u³ is k1²/(4k3) = 0.25 J in every build, the
    # quadratic-cubic closed form of METHODS §4, rel 1e-12)
    path = tmp_path / "reduced.toml"
    path.write_text((DATA / "unit-double-well.toml").read_text()
                    + '\n[tolerances]\n"reduced.damping" = { sd = "10 %" }\n')
    (tolerance,) = resolve_tolerances(load_case(path))
    assert (tolerance.nominal, tolerance.sd) == pytest.approx((0.25, 0.025), rel=1e-12)
    assert tolerance.unit == "N·s/m"
    result = spread_result(load_case(path), samples=8, statics_only=True)
    barrier = result.quantity("barrier_J")
    assert barrier.p05_SI == pytest.approx(0.25, rel=1e-12)
    assert barrier.p95_SI == pytest.approx(0.25, rel=1e-12)
    assert result.probability_bistable.probability == 1.0
