"""One registry of displayed quantities: label, display unit, significant figures, verdicts.

Every table the tool prints (rich table, the design note's Markdown and HTML) and every CSV it
writes draws its columns from here, keyed by the JSON key of the result record
(`harvester.commands.records`).  The key says the SI unit (`onset_mps2` is in m/s²); the column
says how people read it (g, three figures).  So a quantity has one name, one unit and one
verdict style everywhere.

To show a new quantity: add its field to the command's record, then one `Column` here.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, replace

from harvester.analysis.safety import LEVELS
from harvester.commands.records import si_unit
from harvester.units import STANDARD_GRAVITY

# SI unit → display unit: the factor a value in SI is multiplied by
CONVERSIONS = {
    ("m", "mm"): 1e3,
    ("m", "µm"): 1e6,
    ("J", "µJ"): 1e6,
    ("J", "mJ"): 1e3,
    ("W", "µW"): 1e6,
    ("W", "mW"): 1e3,
    ("m/s²", "g"): 1.0 / STANDARD_GRAVITY,
    ("m/s²", "mg"): 1e3 / STANDARD_GRAVITY,
    ("kg", "g"): 1e3,
    ("Ω", "kΩ"): 1e-3,
    ("Ω", "MΩ"): 1e-6,
    ("Pa", "MPa"): 1e-6,
    ("N·s/m", "mN·s/m"): 1e3,
    ("N·m²", "mN·m²"): 1e3,
    ("kg/m", "g/m"): 1e3,
    ("N/V", "mN/V"): 1e3,
    ("F", "nF"): 1e9,
    ("F", "µF"): 1e6,
    ("A", "mA"): 1e3,
    ("A", "µA"): 1e6,
    ("N", "mN"): 1e3,
    ("1/m", "rad/m"): 1.0,
    ("1/m", "1/mm"): 1e-3,
    ("rad", "°"): 180.0 / math.pi,
    ("", "%"): 100.0,
    ("", "µε"): 1e6,
    ("", "×"): 1.0,
    ("", "T"): 1.0,  # a count of forcing periods
    ("year", "years"): 1.0,
    ("m/s³", "g/s"): 1.0 / STANDARD_GRAVITY,
}

# verdicts: the check levels from the most to the least severe, and how each is shown
SEVERITY = tuple(reversed(LEVELS))  # ("fail", "warn", "pass")
LEVEL_STYLE = {"fail": "bold white on red", "warn": "bold yellow", "pass": "green"}


def scale_between(si: str, unit: str) -> float:
    """The factor from the SI unit to the display unit (1 when they are the same)."""
    if unit in ("", si):
        return 1.0
    try:
        return CONVERSIONS[si, unit]
    except KeyError:
        raise ValueError(f"no conversion from {si or 'a ratio'} to {unit}") from None


def format_number(value: object, digits: int = 4, scale: float = 1.0,
                  separator: str = ", ") -> str:
    """A number to `digits` significant figures; lists element-wise; None as "—".

    >>> format_number(0.0123456, 3), format_number(12345678.0, 3), format_number(None)
    ('0.0123', '1.23e+07', '—')
    >>> format_number(0.008, 3, scale=1e3), format_number(True)
    ('8.00', 'yes')
    """
    if hasattr(value, "item") and callable(value.item):  # a numpy scalar
        value = value.item()
    if value is None:
        return "—"
    if isinstance(value, bool):
        return "yes" if value else "no"
    if isinstance(value, str):
        return value
    if isinstance(value, int) and scale == 1.0:  # a count or a code, not a measurement
        return str(value)
    if isinstance(value, (list, tuple)):
        return separator.join(format_number(v, digits, scale) for v in value) or "—"
    number = float(value) * scale
    if math.isnan(number):
        return "n/a"
    if math.isinf(number):
        return "∞" if number > 0 else "−∞"
    if number == 0.0:
        return "0"
    magnitude = math.floor(math.log10(abs(number)))
    if -3 <= magnitude < 6:
        decimals = max(digits - 1 - magnitude, 0)
        return f"{number:.{decimals}f}"
    return f"{number:.{digits - 1}e}"


@dataclass(frozen=True)
class Column:
    """How one quantity is shown: its record key, label, display unit and figures."""

    key: str
    label: str
    unit: str = ""  # display unit; "" for a ratio, a count or words
    digits: int = 4
    words: tuple[tuple[object, str], ...] = ()  # coded values shown as words
    text: bool = False  # words or sentences: left-justified, folded rather than cut
    level: bool = False  # a verdict ("pass" | "warn" | "fail"), styled as such
    separator: str = ", "  # between the values of a list ("–" for an interval)

    @property
    def scale(self) -> float:
        si = si_unit(self.key)
        return 1.0 if si in (None, "SI", "display") else scale_between(si, self.unit)

    @property
    def header(self) -> str:
        return f"{self.label} [{self.unit}]" if self.unit else self.label

    def show(self, value: object) -> str:
        """The value as people read it: its word, or the number in display units."""
        for code, word in self.words:
            if value == code:
                return word
        if self.level and isinstance(value, str):
            return value.upper()
        return format_number(value, self.digits, self.scale, self.separator)

    def numeric(self) -> bool:
        return not (self.text or self.words or self.level)

    def in_unit(self, unit: str, digits: int | None = None) -> Column:
        """The same quantity in another display unit (e.g. an acceleration in g and m/s²)."""
        return replace(self, unit=unit, digits=self.digits if digits is None else digits)


def _registry(*columns: Column) -> dict[str, Column]:
    found: dict[str, Column] = {}
    for c in columns:
        if c.key in found:
            raise ValueError(f"column {c.key!r} registered twice")
        c.scale  # noqa: B018 - fails now, not at display time, on a unit that does not convert
        found[c.key] = c
    return found


WELL_WORDS = ((1, "x > 0"), (-1, "x < 0"), (0, "both"))
YES_NO = ((True, "yes"), (False, "no"))

COLUMNS = _registry(
    # -- design and double well
    Column("regime", "regime", text=True),
    Column("gap_m", "gap", "mm", 3),
    Column("critical_gap_m", "critical gap", "mm", 4),
    Column("wells_m", "stable positions", "mm", 4),
    Column("barrier_J", "barrier ΔU", "µJ", 4),
    Column("barriers_J", "barriers from the left, right well", "µJ", 4),
    Column("saddle_m", "saddle (barrier top)", "mm", 4),
    Column("well_frequencies_Hz", "left, right well frequency", "Hz", 4),
    Column("well_frequency_Hz", "well frequency", "Hz", 4),
    Column("linear_frequency_Hz", "magnet-free frequency", "Hz", 4),
    Column("effective_mass_kg", "effective mass", "g", 4),
    Column("forcing_mass_kg", "forcing mass", "g", 4),
    Column("damping_N_s_per_m", "mechanical damping", "mN·s/m", 4),
    Column("k1_N_per_m", "k1", "N/m", 4),
    Column("k3_N_per_m3", "k3", "N/m³", 4),
    Column("magnet_model", "magnet model", text=True),
    Column("axial_force_N", "magnets' push on the tip (at rest)", "N", 3),
    Column("buckling_load_N", "buckling load π²EI/(4L²)", "N", 3),
    Column("buckling_load_ratio", "push / buckling load", "%", 3),
    Column("fit_terms_count", "force fit: odd terms"),
    Column("fit_window_m", "force fit: window ±", "mm", 4),
    Column("fit_well_error_fraction", "force fit: well position error", "%", 2),
    Column("fit_barrier_error_fraction", "force fit: barrier error", "%", 2),
    Column("fit_rms_error_fraction", "force fit error (RMS)", "%", 2),
    Column("fit_max_error_fraction", "force fit error (largest)", "%", 2),
    Column("fit_inner_max_error_fraction", "force fit error within two wells", "%", 2),
    Column("bending_stiffness_N_m2", "bending stiffness EI", "mN·m²"),
    Column("mass_per_length_kg_per_m", "mass per length", "g/m"),
    Column("neutral_axis_m", "neutral axis above the substrate's bottom face", "mm"),
    Column("tip_mass_kg", "tip mass (magnet + extra)", "g"),
    Column("tip_mass_ratio", "tip mass ratio R"),
    Column("rotary_inertia_ratio", "tip rotary inertia ratio J"),
    Column("tip_mass_offset_ratio", "tip mass centre beyond tip e/L"),
    Column("eigenvalue", "first-mode eigenvalue λ1"),
    Column("short_circuit_frequency_Hz", "f short circuit (no magnets)", "Hz"),
    Column("open_circuit_frequency_Hz", "f open circuit (no magnets)", "Hz"),
    Column("tip_stiffness_N_per_m", "tip stiffness (exact mode)", "N/m"),
    Column("static_stiffness_N_per_m", "tip stiffness 3EI/L³", "N/m"),
    Column("slope_per_deflection_per_m", "tip slope per deflection", "rad/m"),
    Column("root_curvature_per_deflection_per_m2", "root curvature per deflection", "1/m²"),
    Column("coupling_N_per_V", "piezo coupling θ", "mN/V"),
    Column("capacitance_F", "piezo capacitance", "nF"),
    Column("tip_magnet_moment_A_m2", "tip magnet moment", "A·m²"),
    Column("fixed_magnet_moment_A_m2", "fixed magnet moment", "A·m²"),
    Column("magnet_stiffness_at_rest_N_per_m", "magnet stiffness at rest", "N/m"),
    # -- data files
    Column("key", "case key", text=True),
    Column("file", "file", text=True),
    Column("content", "content", text=True),
    Column("frequency_range_Hz", "frequency range", "Hz", 4),
    Column("rms_mps2", "RMS", "g", 3),
    Column("duration_s", "duration", "s", 4),
    Column("sample_rate_Hz", "sample rate", "Hz", 4),
    Column("rows_count", "rows"),
    # -- hop thresholds
    Column("frequency_Hz", "f", "Hz", 3),
    Column("melnikov_mps2", "Melnikov bound", "g", 3),
    Column("onset_mps2", "hop onset", "g", 3),
    Column("certain_mps2", "certain hopping", "g", 3),
    Column("stop_mps2", "strikes the stop", "g", 3),
    Column("interwell_exists_mps2", "orbit exists", "g", 2),
    Column("scan_top_mps2", "largest amplitude tried", "g", 3),
    Column("onset_frequency_Hz", "onset frequency", "Hz", 3),
    Column("status", "status", text=True),
    Column("note", "note", text=True),
    Column("load_ohm", "load", "kΩ", 3),
    # -- power
    Column("mean_power_W", "mean power", "µW", 3),
    Column("ci95_W", "95 % CI", "µW", 3, separator="–"),
    Column("linear_power_W", "magnet-free power", "µW", 3),
    Column("gain_ratio", "gain over magnet-free", "×", 3),
    Column("hop_rate_per_s", "hop rate", "1/s", 3),
    Column("interwell_share", "interwell share", "%", 3),
    Column("rms_voltage_V", "RMS load voltage", "V", 3),
    Column("rms_current_A", "RMS load current", "mA", 3),
    Column("input_power_W", "power drawn from the base", "µW", 3),
    Column("max_abs_x_m", "largest tip deflection", "mm", 3),
    Column("kramers_hop_rate_per_s", "Kramers hop rate (white noise)", "1/s", 3),
    Column("amplitude_mps2", "amplitude", "g", 3),
    # -- orbits
    Column("kind", "orbit", text=True, words=(("interwell-periodic", "interwell"),)),
    Column("dominant_orbit", "main orbit", text=True,
           words=(("interwell-periodic", "interwell"),)),
    Column("flagged_share", "left the trusted range", "%", 3),
    Column("x_min_m", "lowest deflection", "mm", 3),
    Column("x_max_m", "highest deflection", "mm", 3),
    Column("max_abs_v_mps", "largest tip speed", "m/s", 3),
    Column("well", "well", words=WELL_WORDS),
    Column("period", "period", "T"),
    Column("share", "share", "%", 3),
    Column("lyapunov_per_s", "λ max", "1/s", 3),
    Column("rms_displacement_m", "RMS deflection", "mm", 3),
    Column("mean_offset_m", "mean offset", "mm", 3),
    Column("equivalent_stiffness_N_per_m", "equivalent stiffness", "N/m", 3),
    # -- fatigue life
    Column("life_years", "substrate life (Miner)", "years", 3),
    Column("design_life_years", "design life", "years", 3),
    Column("stress_factor", "stress factor to use the design life up", digits=3),
    Column("damage_per_h", "damage per hour", "1/h", 3),
    Column("cycles_count", "cycles counted", digits=4),
    Column("simulated_duration_s", "simulated time", "s", 3),
    # -- checks
    Column("check", "check", text=True),
    Column("level", "result", level=True),
    Column("margin", "margin", digits=3),
    Column("worst_check", "worst check", text=True),
    Column("worst_level", "worst result", level=True),
    Column("worst_margin", "worst margin", digits=3),
    Column("recommended", "recommended", words=((True, "★"), (False, ""))),
    # -- behind a bridge: DC power, the store and the node
    Column("dc_power_W", "DC power", "µW", 3),
    Column("dc_ci95_W", "DC 95 % CI", "µW", 3, separator="–"),
    Column("diode_drop_V", "diode drop (each)", "V", 3),
    Column("store", "store", text=True),
    Column("store_voltage_V", "store voltage", "V", 3),
    Column("dc_current_A", "mean bridge current", "µA", 3),
    Column("conduction_share", "bridge conducts", "%", 3),
    Column("conducting_share", "orbits conducting", "%", 3),
    Column("diode_loss_W", "diode loss", "µW", 3),
    Column("dc_load_ohm", "DC load", "kΩ", 3),
    Column("charge_time_s", "charge time", "s", 3),
    Column("charge_target_V", "charged to", "V", 3),
    Column("node_power_W", "node consumption (mean)", "µW", 3),
    Column("budget_margin_W", "budget margin", "µW", 3),
    Column("node_starts", "node starts", words=((True, "yes"), (False, "NO"))),
    Column("start_share", "starts on", "%", 3),
    Column("start_voltage_V", "start voltage", "V", 3),
    Column("start_dc_power_W", "DC power at the start voltage", "µW", 3),
    Column("time_to_first_report_s", "first report after", "s", 3),
    # -- spread over build tolerances
    Column("tolerance", "tolerance", text=True),
    Column("distribution", "distribution", text=True),
    Column("quantity", "quantity", text=True),
    Column("probability", "share of builds", "%", 3),
    Column("ci95_probability", "95 % CI", "%", 3, separator="–"),
    Column("events_count", "builds"),
    Column("samples_count", "sampled builds"),
    Column("defined_count", "builds with a value"),
    Column("invalid_count", "builds that cannot exist"),
    Column("rank_correlation", "rank correlation ρ", digits=2),
    Column("largest_correlation", "largest |ρ|", digits=2),
    # -- service temperature range (compare)
    Column("regimes_at_ends", "regime at the coldest, hottest", text=True),
    Column("barriers_at_ends_J", "barrier at the coldest, hottest", "µJ", 3),
    Column("regime_changes_in_range", "changes regime in the range",
           words=YES_NO),
    # -- a shaker record against the model (trace)
    Column("forcing_frequency_Hz", "forcing frequency", "Hz", 5),
    Column("forcing_amplitude_mps2", "forcing amplitude (RMS if random)", "g", 3),
    Column("orbit", "orbit", text=True, words=(("interwell-periodic", "interwell periodic"),)),
    Column("correlation_dimension", "correlation dimension of the section", digits=3),
    Column("model_agrees", "model agrees", words=YES_NO),
    Column("hop_count", "hops counted"),
    Column("well_time_share", "time below, above the saddle", "%", 3),
    Column("orbit_period_count", "section repeats after", "T", words=((0, "never"),)),
    Column("section_points_count", "section points"),
    Column("scaling_range_ratio", "scaling range of r (× well position)", digits=3,
           separator="–"),
    Column("predicted_scaling_range_ratio", "scaling range of r, model", digits=3,
           separator="–"),
    # -- calibration from tests
    Column("source", "source", text=True),
    Column("damping_ratio", "damping ratio ζ (log decrement)", digits=4),
    Column("damping_ci95_ratio", "ζ 95 % CI (log decrement)", digits=4, separator="–"),
    Column("envelope_damping_ratio", "damping ratio ζ (Hilbert envelope)", digits=4),
    Column("envelope_damping_ci95_ratio", "ζ 95 % CI (Hilbert envelope)", digits=4,
           separator="–"),
    Column("natural_frequency_Hz", "natural frequency of the decay", "Hz", 4),
    Column("damped_frequency_Hz", "damped frequency", "Hz", 4),
    Column("amplitude_dependent", "damping depends on amplitude", words=YES_NO),
    Column("remanence_scale_ratio", "remanence ÷ the material's", digits=4),
    Column("remanence_scale_ci95_ratio", "remanence ratio 95 % CI", digits=4, separator="–"),
    Column("tip_remanence_T", "tip magnet remanence", "T", 4),
    Column("fixed_remanence_T", "fixed magnet remanence", "T", 4),
    Column("gap_offset_m", "gap offset (built − drawn)", "mm", 3),
    Column("gap_offset_ci95_m", "gap offset 95 % CI", "mm", 3, separator="–"),
    Column("remanence_gap_correlation", "correlation of the two estimates", digits=2),
    Column("force_offset_N", "load-cell reading at zero deflection", "mN", 3),
    Column("residual_rms_N", "fit residual (RMS)", "mN", 3),
    Column("even_terms_significant", "even terms significant (unequal wells)", words=YES_NO),
    # -- calibration from a stepped sine about a well
    Column("half_power_rows_count", "steps in the half-power band"),
    Column("phase_read_as", "phase read as", text=True,
           words=(("lead", "x = X cos(ωt + φ)"), ("lag", "x = X cos(ωt − φ) (sign turned)"),
                  ("", "no phase column"))),
    Column("well_frequency_ci95_Hz", "well frequency 95 % CI", "Hz", 6, separator="–"),
    Column("total_damping_ratio", "total damping ratio ζ_T (at the load)", digits=4),
    Column("total_damping_ci95_ratio", "ζ_T 95 % CI", digits=4, separator="–"),
    Column("misfit_ratio", "receptance misfit (RMS ÷ peak)", "%", 2),
    Column("response_level_ratio", "response level ÷ the model's m_f/m", digits=4),
    Column("response_level_ci95_ratio", "response level 95 % CI", digits=4, separator="–"),
    Column("largest_amplitude_m", "largest tip amplitude", "mm", 3),
    Column("backbone_shift_Hz", "well frequency shift there (model)", "Hz", 2),
    Column("total_damping_N_s_per_m", "total damping at the load", "mN·s/m", 4),
    Column("mechanical_damping_N_s_per_m", "mechanical damping (ring-down)", "mN·s/m", 4),
    Column("electrical_damping_N_s_per_m", "electrical damping at the load", "mN·s/m", 4),
    Column("electrical_damping_ci95_N_s_per_m", "electrical damping 95 % CI", "mN·s/m", 4,
           separator="–"),
    Column("reactance_ratio", "circuit lag ω·a/h (ωL/R, ωRC)", digits=3),
    Column("flux_linkage_V_s_per_m", "coil flux linkage Bl", "V·s/m", 4),
    Column("flux_linkage_ci95_V_s_per_m", "Bl 95 % CI", "V·s/m", 4, separator="–"),
    Column("predicted_flux_linkage_V_s_per_m", "Bl in the case", "V·s/m", 4),
    Column("coupling_ci95_N_per_V", "θ 95 % CI", "mN/V", 4, separator="–"),
    Column("predicted_coupling_N_per_V", "θ in the model", "mN/V", 4),
    Column("mechanical_well_frequency_Hz", "mechanical well frequency", "Hz", 6),
    Column("mechanical_well_frequency_ci95_Hz", "mechanical well frequency 95 % CI", "Hz", 6,
           separator="–"),
    Column("predicted_well_frequency_Hz", "mechanical well frequency, model", "Hz", 6),
    Column("predicted_well_frequency_interval_Hz", "model's interval", "Hz", 6,
           separator="–"),
    Column("predicted_from", "model from", text=True),
    Column("well_frequency_agrees", "the two meet", words=YES_NO),
    Column("remanence_scale_per_gap_per_m", "remanence ratio change per gap (same frequency)",
           "1/mm", 3),
    Column("base_amplitude_mps2", "base amplitude", "mg", 3),
    Column("measured_amplitude_m", "tip amplitude, measured", "µm", 4),
    Column("predicted_amplitude_m", "calibrated model", "µm", 4),
    Column("design_amplitude_m", "design", "µm", 4),
    Column("measured_phase_rad", "phase, measured", "°", 4),
    Column("predicted_phase_rad", "calibrated model", "°", 4),
    # -- sweeps
    Column("over", "swept", text=True),
    Column("direction", "sweep", text=True),
    Column("start", "start", text=True),
    Column("peak_m", "peak deflection", "mm", 3),
    Column("from", "from", text=True),
    Column("to", "to", text=True),
    Column("rate_Hz_per_s", "sweep rate", "Hz/s", 3),
    Column("rate_mps2_per_s", "sweep rate", "g/s", 3),
    Column("step_Hz", "staircase step", "Hz", 3),
    Column("step_mps2", "staircase step", "g", 3),
    Column("doubled_rate_shift_Hz", "jumps moved at twice the rate", "Hz", 3),
    Column("doubled_rate_shift_mps2", "jumps moved at twice the rate", "g", 3),
    Column("rate_note", "rate", text=True),
    # -- basins
    Column("rank", "basin"),
    Column("ci95_share", "95 % CI", "%", 3, separator="–"),
    Column("high_power", "high power", words=((True, "yes"), (False, ""))),
    Column("high_power_share", "high-power starts", "%", 3),
    Column("starts_count", "starts"),
    Column("forcing_phase_fraction", "forcing phase of the starts", "%", 3),
    Column("transient_periods_count", "transient periods"),
    Column("window_periods_count", "averaged periods"),
    Column("upsweep_power_W", "power after an up-sweep", "µW", 3),
    Column("upsweep_reaches_high_power", "up-sweep reaches it",
           words=((True, "yes"), (False, "no"), (None, "—"))),
    Column("needs_lucky_start", "needs a lucky start",
           words=((True, "yes"), (False, "no"), (None, "—"))),
)


def column(key: str, unit: str | None = None, digits: int | None = None) -> Column:
    """The registered column for `key`, optionally in another display unit."""
    found = COLUMNS[key]
    return found if unit is None and digits is None else found.in_unit(
        found.unit if unit is None else unit, digits)


def columns(*keys: str) -> list[Column]:
    return [COLUMNS[k] for k in keys]


def severity_rank(level: str) -> int:
    """0 for the most severe verdict ("fail"), up to 2 for "pass"."""
    return SEVERITY.index(level)
