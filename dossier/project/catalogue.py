"""The catalogue of metrics the dossier reports: what each one is, not how it is computed.

Name, label, unit, definition, how it is computed (in words), the source that defines it, the
fitted channels it needs, and whether it is given per load or once per specimen. The manifest's
targets are checked against these names, and the glossary, the tables and ``results.json`` read
this catalogue; :mod:`dossier.metrics.evaluate` holds one function per entry (an import-time
check keeps the two in step).
"""

from __future__ import annotations

from dataclasses import dataclass

LINEAR_RANGE_FRACTION = 0.10  # linear range: where |Fy − Cα·α| first exceeds 10 % of |Cα·α| (common practice)


@dataclass(frozen=True)
class MetricDefinition:
    """What a metric is, for the glossary, the tables and ``results.json``."""

    name: str
    label: str
    unit: str
    definition: str
    computed: str
    source: str
    channels: tuple[str, ...]
    per_load: bool = True  # False: one value per specimen (load sensitivity)
    headline: bool = False  # shown in the summary and by-load tables
    basis: str = "model"  # "model": from the fitted Magic Formula; "data": measured from the conditioned runs

    @property
    def group(self) -> str:
        """Which table a metric belongs to: "cornering", "camber_longitudinal" or "pressure"."""
        if self.name.endswith(PRESSURE_SUFFIXES):
            return "pressure"
        return "camber_longitudinal" if ("fx" in self.channels or self.name.startswith("camber")) else "cornering"


# The stiffnesses the trade reads against load first (charted together, model curve and measured values).
STIFFNESS_METRICS = ("cornering_stiffness", "cornering_coefficient", "longitudinal_slip_stiffness", "camber_stiffness")
MIN_PRESSURE_SPAN_KPA = 5.0  # tested pressures closer than this give no slope against pressure
PRESSURE_SUFFIXES = ("_per_10kpa", "_pct_per_bar")
# Metrics whose change with inflation pressure is reported: name -> (label, unit, source, channels).
PRESSURE_SENSITIVE = {
    "cornering_stiffness": ("Cornering stiffness", "N/deg", ("fy",)),
    "peak_lateral_friction": ("Peak lateral friction", "1", ("fy",)),
    "pneumatic_trail": ("Pneumatic trail", "mm", ("fy", "mz")),
}


def _pressure_metrics() -> list[MetricDefinition]:
    """Each pressure-sensitive metric's slope against pressure, per 10 kPa and in % per bar."""
    out = []
    for name, (label, unit, channels) in PRESSURE_SENSITIVE.items():
        computed = (
            f"The model's {label.lower()} at the highest tested pressure minus that at the lowest, over the "
            "pressure difference (a secant over the tested span, at the camber and load given); needs two or "
            f"more pressures at least {MIN_PRESSURE_SPAN_KPA:g} kPa apart (the Magic Formula's pressure terms, "
            "BSP2010)."
        )
        per10 = f"{unit} per 10 kPa" if unit != "1" else "per 10 kPa"
        out.append(
            MetricDefinition(
                f"{name}_per_10kpa",
                f"{label} change per 10 kPa",
                per10,
                f"Change of {label.lower()} per 10 kPa of inflation pressure over the pressures tested.",
                computed,
                "Besselink, Schmeitz & Pacejka 2010 (pressure terms); common practice (per 10 kPa)",
                channels,
            )
        )
        out.append(
            MetricDefinition(
                f"{name}_pct_per_bar",
                f"{label} change per bar",
                "%/bar",
                f"Change of {label.lower()} per bar (100 kPa) of inflation pressure over the pressures tested, "
                "in % of its value at the pressure given.",
                computed,
                "Besselink, Schmeitz & Pacejka 2010 (pressure terms); common practice (% per bar)",
                channels,
            )
        )
    return out


D = MetricDefinition
METRICS: dict[str, MetricDefinition] = {
    m.name: m
    for m in (
        D(
            "cornering_stiffness",
            "Cornering stiffness",
            "N/deg",
            "Negative slope of lateral force against slip angle at zero slip angle.",
            "Central difference of the fitted Fy0 at zero slip (±0.001°), at the camber and pressure given.",
            "SAE J670 (cornering stiffness); Pacejka 2006 §4.3.2",
            ("fy",),
            headline=True,
        ),
        D(
            "cornering_coefficient",
            "Cornering coefficient",
            "1/deg",
            "Cornering stiffness divided by the normal load.",
            "Model cornering stiffness divided by the load the metric is evaluated at.",
            "SAE J670; Gillespie 1992, ch. 6",
            ("fy",),
            headline=True,
        ),
        D(
            "peak_lateral_friction",
            "Peak lateral friction",
            "1",
            "Largest |Fy| over the normal load, averaged over the positive and negative slip directions "
            "(the average cancels the ply-steer and conicity offset), within the measured slip range.",
            "Maximum of |Fy0| of the fitted model on each side of zero slip, refined by a bounded scalar search.",
            "common practice",
            ("fy",),
            headline=True,
        ),
        D(
            "peak_lateral_friction_positive_slip",
            "Peak lateral friction, positive slip",
            "1",
            "Largest |Fy| over the normal load for positive slip angles (ISO 8855).",
            "As peak lateral friction, positive side only.",
            "common practice",
            ("fy",),
        ),
        D(
            "peak_lateral_friction_negative_slip",
            "Peak lateral friction, negative slip",
            "1",
            "Largest |Fy| over the normal load for negative slip angles (ISO 8855).",
            "As peak lateral friction, negative side only.",
            "common practice",
            ("fy",),
        ),
        D(
            "slip_angle_at_peak",
            "Slip angle at peak",
            "deg",
            "Magnitude of the slip angle at which |Fy| is largest, averaged over both slip directions.",
            "Arguments of the two maxima found for peak lateral friction, averaged.",
            "common practice",
            ("fy",),
            headline=True,
        ),
        D(
            "slip_angle_at_peak_positive_slip",
            "Slip angle at peak, positive slip",
            "deg",
            "Slip angle at which |Fy| is largest for positive slip angles.",
            "Argument of the positive-side maximum.",
            "common practice",
            ("fy",),
        ),
        D(
            "slip_angle_at_peak_negative_slip",
            "Slip angle at peak, negative slip",
            "deg",
            "Magnitude of the slip angle at which |Fy| is largest for negative slip angles.",
            "Argument of the negative-side maximum.",
            "common practice",
            ("fy",),
        ),
        D(
            "linear_range",
            "Linear range",
            "deg",
            f"Slip angle up to which Fy stays within {100 * LINEAR_RANGE_FRACTION:.0f} % of Cα·α (measured from the "
            "zero-slip offset), averaged over both directions.",
            "First slip angle on each side where |Fy − Fy(0) − Cα·α| exceeds the fraction of "
            "|Cα·α| (grid, then Brent's method).",
            "common practice",
            ("fy",),
        ),
        D(
            "post_peak_retention",
            "Post-peak retention",
            "1",
            "|Fy| at the largest measured slip angle divided by the peak |Fy|, averaged over both directions.",
            "Model values at the edges of the measured slip range over the model peaks.",
            "common practice",
            ("fy",),
        ),
        D(
            "aligning_stiffness",
            "Aligning stiffness",
            "N·m/deg",
            "Slope of aligning moment against slip angle at zero slip (positive: restoring).",
            "Central difference of the fitted Mz0 at zero slip.",
            "SAE J670; Pacejka 2006 §4.3.2",
            ("mz",),
        ),
        D(
            "pneumatic_trail",
            "Pneumatic trail at zero slip",
            "mm",
            "t0 = −(dMz/dα)/(dFy/dα) at zero slip angle.",
            "Ratio of the fitted models' slopes at zero slip.",
            "Pacejka 2006 §4.3; domain primer §5",
            ("fy", "mz"),
            headline=True,
        ),
        D(
            "peak_aligning_moment",
            "Peak aligning moment",
            "N·m",
            "Largest |Mz| within the measured slip range, averaged over both slip directions.",
            "Maximum of |Mz0| of the fitted model on each side of zero slip.",
            "common practice",
            ("mz",),
        ),
        D(
            "slip_angle_at_peak_aligning_moment",
            "Slip angle at peak aligning moment",
            "deg",
            "Magnitude of the slip angle at which |Mz| is largest, averaged over both directions.",
            "Arguments of the two Mz0 maxima, averaged.",
            "common practice",
            ("mz",),
        ),
        D(
            "residual_cornering_force",
            "Residual cornering force",
            "N",
            "Lateral force at the slip angle where the aligning moment is zero (ply-steer and conicity together).",
            "Root of the fitted Mz0 near zero slip, Fy0 there.",
            "common practice",
            ("fy", "mz"),
        ),
        D(
            "residual_aligning_moment",
            "Residual aligning moment",
            "N·m",
            "Aligning moment at the slip angle where the lateral force is zero.",
            "Root of the fitted Fy0 near zero slip, Mz0 there.",
            "common practice",
            ("fy", "mz"),
        ),
        D(
            "camber_stiffness",
            "Camber stiffness",
            "N/deg",
            "Slope of lateral force against inclination angle at zero slip and zero inclination.",
            "Central difference of the fitted Fy0 in inclination (±0.001°); needs cambered data.",
            "SAE J670 (camber stiffness); Pacejka 2006 §4.3.2",
            ("fy",),
            headline=True,
        ),
        D(
            "camber_coefficient",
            "Camber coefficient",
            "1/deg",
            "Camber stiffness divided by the normal load.",
            "Model camber stiffness over the load.",
            "SAE J670",
            ("fy",),
        ),
        D(
            "longitudinal_slip_stiffness",
            "Longitudinal slip stiffness",
            "N",
            "Slope of longitudinal force against slip ratio at zero slip (N per unit slip ratio).",
            "Central difference of the fitted Fx0 at zero slip ratio (±1e-5).",
            "SAE J670; Pacejka 2006 §4.3.2",
            ("fx",),
            headline=True,
        ),
        D(
            "peak_driving_friction",
            "Peak driving friction",
            "1",
            "Largest Fx over the normal load for positive (driving) slip ratios within the measured range.",
            "Maximum of Fx0 of the fitted model for κ > 0.",
            "common practice",
            ("fx",),
            headline=True,
        ),
        D(
            "slip_ratio_at_peak_driving",
            "Slip ratio at peak driving force",
            "1",
            "Slip ratio at which the driving force is largest.",
            "Argument of the κ > 0 maximum.",
            "common practice",
            ("fx",),
        ),
        D(
            "peak_braking_friction",
            "Peak braking friction",
            "1",
            "Largest |Fx| over the normal load for negative (braking) slip ratios within the measured range.",
            "Maximum of |Fx0| of the fitted model for κ < 0.",
            "common practice",
            ("fx",),
            headline=True,
        ),
        D(
            "slip_ratio_at_peak_braking",
            "Slip ratio at peak braking force",
            "1",
            "Magnitude of the slip ratio at which the braking force is largest.",
            "Argument of the κ < 0 maximum.",
            "common practice",
            ("fx",),
        ),
        D(
            "friction_load_sensitivity",
            "Friction load sensitivity",
            "1/kN",
            "Slope of peak lateral friction against normal load at the nominal load (negative: "
            "friction falls with load).",
            "Central difference of the model's peak lateral friction at Fz0 ± 5 %.",
            "common practice",
            ("fy",),
            per_load=False,
        ),
        D(
            "load_at_max_cornering_stiffness",
            "Load of maximum cornering stiffness",
            "N",
            "Normal load at which the cornering stiffness is largest.",
            "Bounded scalar search of the model cornering stiffness over 0.2-4 Fz0.",
            "Pacejka 2006 §4.3.2 (pKy2)",
            ("fy",),
            per_load=False,
        ),
        *_pressure_metrics(),
        D(
            "overturning_moment_stiffness",
            "Overturning moment slope",
            "N·m/deg",
            "Slope of the overturning moment Mx against slip angle at zero slip (ISO 8855 axes).",
            f"Slope at zero of a cubic fitted by least squares to the conditioned Mx over |α| ≤ {2.0:g}°; several "
            "runs at one load: their mean.",
            "SAE J670 (overturning moment); common practice (slope at zero slip)",
            ("fy",),
            basis="data",
        ),
        D(
            "overturning_moment_at_zero_slip",
            "Overturning moment at zero slip",
            "N·m",
            "Overturning moment Mx at zero slip angle (ISO 8855 axes).",
            "Value at zero of the same local cubic.",
            "SAE J670 (overturning moment)",
            ("fy",),
            basis="data",
        ),
        D(
            "rolling_resistance_moment",
            "Rolling-resistance moment",
            "N·m",
            "Magnitude of the rolling-resistance moment My at zero slip angle.",
            "|My| at zero of a local cubic fitted to the conditioned My over |α| ≤ 2°.",
            "SAE J670 (rolling resistance moment)",
            ("fy",),
            basis="data",
        ),
        D(
            "rolling_resistance_coefficient",
            "Rolling-resistance coefficient",
            "1",
            "Rolling-resistance force over the normal load at zero slip, the force taken as |My| over the moment arm "
            "(convention: the unloaded radius R0 of the size designation, or the manifest's unloaded_radius_m).",
            "|My(0)| / (R0 · Fz), Fz the mean load of the points.",
            "SAE J670 (rolling resistance force and coefficient); ISO 28580 uses the loaded radius (from memory)",
            ("fy",),
            basis="data",
        ),
        D(
            "relaxation_length_lateral",
            "Relaxation length, lateral",
            "m",
            "Rolling distance over which the lateral force builds up after a change of slip angle (first-order "
            "single-contact-point model): σ = V·τ.",
            "From the slip lag of the continuous slip-angle sweeps: both halves near zero slip fitted with one cubic "
            "steady curve shifted by r·τ (r each half's measured sweep rate), times the run's mean speed; several "
            "runs at one load: their mean. Cross-check: the time constant of the force settling after the slip stops.",
            "Pacejka 2006 §7.2 (relaxation length)",
            ("fy",),
            headline=True,
            basis="data",
        ),
        D(
            "relaxation_length_longitudinal",
            "Relaxation length, longitudinal",
            "m",
            "Rolling distance over which the longitudinal force builds up after a change of slip ratio: σ = V·τ.",
            "As the lateral one, from the continuous slip-ratio sweeps.",
            "Pacejka 2006 §7.2 (relaxation length)",
            ("fx",),
            headline=True,
            basis="data",
        ),
    )
}
