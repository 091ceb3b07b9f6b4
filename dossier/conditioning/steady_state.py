"""Conditioning: from a raw rig run to clean, steady-state curves, one per operating point.

Steps, each recorded in the run's :class:`ConditioningAccount`:

1. **Operating points.** Find the load and camber steps from the channels themselves. The
   manifest's nominal set-points, where given, are hints: each sample is assigned to the
   nearest one; without hints the levels are detected from a histogram of the channel.
   Samples outside the tolerance band are transitions (or levels that match no set-point).
2. **Settling.** The first ``settling_s`` seconds of every stay at a set-point are dropped, and
   so is any sample held within ``slip_settling_s`` of the sweep stopping, or within the first
   ``sweep_run_in_deg`` of a sweep that starts from a hold (the relaxation lag is changing there).
3. **Spikes.** Isolated spikes in the force and moment channels are removed (:func:`_spikes`).
4. **Sweep direction.** Each sample is labelled rising, falling or held by how the swept
   channel (slip angle, or slip ratio for longitudinal runs) moves there; continuous and
   stepped sweeps alike.
5. **Curves.** Rising and falling halves are averaged separately in bins of the swept
   channel. Their difference at zero slip is the hysteresis, reported in force and as an
   equivalent slip lag. The steady-state curve bins all samples after shifting each moving
   half back by that lag (rising samples saw x − lag, falling ones x + lag); held samples need
   no shift. This removes the first-order relaxation lag even where only one half covers a bin.
   A bin's mean force is that of a curve bending across the bin's spread of slip; it is moved to
   the curve's value at the bin's mean slip (second-order Taylor term, :func:`_spread_corrected`).
   For the relaxation length (:mod:`dossier.conditioning.relaxation`) the lag also gets its
   standard uncertainty, the sweep rate near zero slip is measured from the time stamps, and the
   force samples of every hold after the sweep stops are kept (:class:`SlipHold`).
6. **Offsets and coverage.** Residual force and moment at zero slip, and findings: a sweep that
   does not pass the peak, a narrow slip range, too few points, a load above the rated load,
   a pressure away from nominal. Each run gets a verdict: sound / usable with findings / unusable.
"""

from __future__ import annotations

import datetime as dt
from dataclasses import dataclass, field, replace
from typing import cast

import numpy as np

from ..ingest.rig_table import RigRun
from ..project.manifest import ConditioningSettings
from ..standards import units

REASON_TRANSITION = "load or camber off set-point (transition)"
REASON_UNMATCHED = "steady level matching no set-point (out of range)"
REASON_SETTLING = "settling after a set-point change"
REASON_SPIKE = "spike (neighbour test)"
REASON_RUN_IN = "sweep run-in from a hold (relaxation lag still building)"
REASON_SLIP_SETTLING = "slip settling after the sweep stopped (relaxation lag decaying)"
REASON_STEP_MOVE = "moving between slip steps (stepped sweep)"
REASON_SPARSE = "too few samples in slip bin"
REASONS = (
    REASON_TRANSITION,
    REASON_UNMATCHED,
    REASON_SETTLING,
    REASON_SPIKE,
    REASON_RUN_IN,
    REASON_SLIP_SETTLING,
    REASON_STEP_MOVE,
    REASON_SPARSE,
)

SOUND, WITH_FINDINGS, UNUSABLE = "sound", "usable with findings", "unusable"
NOTE, FINDING, BLOCKING = "note", "finding", "unusable"

HELD_RATIO_TOLERANCE = 0.005  # a held slip ratio within ±0.005 of its set-point (common practice)
MIN_SLIP_RATIO_RANGE = 0.10  # a longitudinal sweep narrower than ±0.10 misses the peak (common practice)
DETECT_MIN_SHARE = 0.03  # a detected level holds at least 3 % of the samples
OVERVIEW_POINTS = 4000  # samples kept for the time-history figure
# A hold after the sweep stops is kept for at most this long: five time constants of a slow
# passenger-car tire (0.3 s, e.g. 0.8 m at 10 km/h) are over by then (first-order model).
HOLD_RECORD_S = 2.0
HOLD_MIN_SAMPLES = 8  # fewer held samples cannot carry a three-parameter exponential


@dataclass(frozen=True)
class Finding:
    """One thing a reviewer should know about the data; `severity` is note, finding or unusable."""

    severity: str
    text: str


@dataclass(frozen=True)
class SlipCurve:
    """A conditioned sweep: bin means sorted by the swept channel, all arrays of equal length;
    forces and moments are taken to the bins' mean slip (:func:`_spread_corrected`).

    `x` is the slip angle in deg (``sweep == "slip_angle"``) or the slip ratio (``"slip_ratio"``).
    """

    sweep: str
    x: np.ndarray
    fz_n: np.ndarray
    fy_n: np.ndarray | None
    mz_nm: np.ndarray | None
    fx_n: np.ndarray | None
    samples_per_bin: np.ndarray
    bin_index: np.ndarray | None = None  # integer bin of each point (x ≈ bin_index · bin width)
    mx_nm: np.ndarray | None = None  # overturning moment, where the run carries it
    my_nm: np.ndarray | None = None  # rolling-resistance moment, where the run carries it

    @property
    def slip_angle_deg(self) -> np.ndarray:
        return self.x

    @property
    def n_points(self) -> int:
        return int(self.x.size)

    @property
    def main(self) -> np.ndarray:
        """The force the sweep is about: Fy for slip-angle sweeps, Fx for slip-ratio sweeps."""
        # Present on every curve conditioning makes: _operating_point reads the sweep's force
        # channel (a KeyError otherwise) before it bins; so a cast (no run-time check) suffices.
        return cast(np.ndarray, self.fy_n if self.sweep == "slip_angle" else self.fx_n)

    def scaled(self, factor: float) -> SlipCurve:
        """Return the curve with forces and moments (not the load) multiplied by `factor`."""

        def s(a):
            return None if a is None else _frozen(a * factor)

        return SlipCurve(
            self.sweep,
            self.x,
            self.fz_n,
            s(self.fy_n),
            s(self.mz_nm),
            s(self.fx_n),
            self.samples_per_bin,
            self.bin_index,
            s(self.mx_nm),
            s(self.my_nm),
        )


@dataclass(frozen=True)
class Hysteresis:
    """Rising minus falling half of the sweep at zero slip, and the slip lag that explains it.

    `sweep_rate_per_s` is how fast the halves move through `window` (|x| ≤ window, the lines'
    span): the mean of the rising and the falling half's median |dx/dt| from the time stamps, so
    that ``slip_lag / sweep_rate_per_s`` is the lag in seconds (first-order model).
    """

    force_diff_n: float
    mz_diff_nm: float | None
    slip_lag: float | None  # deg for slip-angle sweeps, 1 for slip-ratio sweeps
    sweep_rate_per_s: float | None = None  # deg/s for slip-angle sweeps, 1/s for slip-ratio sweeps
    window: float | None = None  # half-width of the span about zero slip the lines were fitted over


@dataclass(frozen=True)
class LagSamples:
    """The moving samples of a sweep within ±`window` of zero slip, for the relaxation lag fit.

    Kept samples only (settled, no spikes, past the run-in); all arrays of equal length, in time
    order. `travel` is how far the slip has moved since the current stretch of one direction began
    (from a hold or a reversal): the lag is still building over the first few lags of travel.
    Forces are as recorded (no drift correction: a scale factor does not change a lag).
    """

    window: float
    time_s: np.ndarray
    x: np.ndarray
    main: np.ndarray  # Fy (slip-angle sweep) or Fx (slip-ratio sweep), N
    direction: np.ndarray  # +1 rising, −1 falling
    travel: np.ndarray  # same unit as x
    rate_per_s: np.ndarray  # dx/dt of each sample over ±2 samples (:func:`_slip_rate`)
    rate_rising_per_s: float  # median |dx/dt| of the rising samples
    rate_falling_per_s: float

    @property
    def n_samples(self) -> int:
        return int(self.x.size)


@dataclass(frozen=True)
class SlipHold:
    """The samples of one hold after the sweep stopped moving: the force settling at a held slip.

    The conditioning drops the first ``slip_settling_s`` of a hold from the curves (the lag is
    decaying there); these samples, from the first held one for up to :data:`HOLD_RECORD_S`, are
    what a first-order time constant is fitted to. Forces are as recorded (no drift correction:
    a scale factor does not change a time constant).
    """

    time_s: np.ndarray
    main: np.ndarray  # Fy (slip-angle sweep) or Fx (slip-ratio sweep), N
    slip: float  # the held slip: deg, or slip ratio
    approach_rate_per_s: float | None  # how fast the slip moved just before it stopped
    first_line: int

    @property
    def n_samples(self) -> int:
        return int(self.time_s.size)


@dataclass(frozen=True)
class ZeroSlipOffsets:
    """Residual force and moment of the steady-state curve (ply-steer and conicity together)."""

    fy_at_zero_slip_n: float | None
    mz_at_zero_slip_nm: float | None
    residual_cornering_force_n: float | None  # Fy where Mz = 0 (common practice)
    residual_aligning_moment_nm: float | None  # Mz where Fy = 0 (common practice)


@dataclass(frozen=True)
class OperatingPoint:
    """One specimen at one nominal load, camber and pressure, in one run."""

    specimen: str
    run_index: int
    source_file: str
    sweep: str
    rolling_direction: str
    tested_at: dt.datetime | None
    load_n: float  # nominal set-point (hint or detected)
    camber_deg: float
    pressure_kpa: float  # nominal
    mean_load_n: float
    measured_pressure_kpa: float | None
    mean_speed_kmh: float | None
    curve: SlipCurve  # steady state (both directions)
    rising: SlipCurve | None
    falling: SlipCurve | None
    hysteresis: Hysteresis | None
    offsets: ZeroSlipOffsets | None
    n_sweeps: float  # full cycles of the swept channel (half-sweeps / 2)
    raw_x: np.ndarray  # kept samples, for plotting the data cloud
    raw_main: np.ndarray
    first_line: int
    last_line: int
    n_samples_kept: int
    time_span_s: tuple[float, float]
    findings: tuple[Finding, ...] = ()
    force_scale: float = 1.0  # drift correction applied to forces and moments (1 = none)
    holds: tuple[SlipHold, ...] = ()  # the force settling after each stop of the sweep
    lag_samples: LagSamples | None = None  # both halves near zero slip, for the relaxation length
    # Combined slip: the other slip held during the sweep (slip angle in deg for a slip-ratio sweep,
    # slip ratio for a slip-angle sweep), its set-point and its measured mean; None: pure slip.
    held_slip: float | None = None
    held_slip_mean: float | None = None

    @property
    def combined(self) -> bool:
        return self.held_slip is not None

    @property
    def key(self) -> tuple:
        base = (self.run_index, self.load_n, self.camber_deg, self.pressure_kpa)
        return base if self.held_slip is None else (*base, self.held_slip)

    def at_condition(self, camber_deg: float, pressure_kpa: float) -> bool:
        """True at this camber (to 0.01°) and pressure (to 1 kPa): how conditions are told apart."""
        return same_condition((self.camber_deg, self.pressure_kpa), (camber_deg, pressure_kpa))

    @property
    def condition(self) -> tuple[float, float]:
        """(camber in deg, pressure in kPa) of the point."""
        return (self.camber_deg, self.pressure_kpa)


def same_condition(a: tuple[float, float], b: tuple[float, float]) -> bool:
    """Whether two (camber deg, pressure kPa) conditions are the same: camber to 0.01°, pressure to 1 kPa."""
    return round(a[0], 2) == round(b[0], 2) and round(a[1]) == round(b[1])


@dataclass(frozen=True)
class RunOverview:
    """A thinned time history of the run, for the data-quality figure."""

    time_s: np.ndarray
    fz_n: np.ndarray
    x: np.ndarray
    kept: np.ndarray


@dataclass(frozen=True)
class ConditioningAccount:
    """What conditioning did to one run: samples in, kept, dropped by reason, and the verdict."""

    run_index: int
    specimen: str
    source_file: str
    sha256: str
    n_samples: int
    n_kept: int
    dropped: dict[str, int] = field(default_factory=dict)
    operating_points_found: int = 0
    load_levels_n: tuple[float, ...] = ()
    levels_detected: bool = False
    findings: tuple[Finding, ...] = ()
    verdict: str = SOUND
    verdict_reasons: tuple[str, ...] = ()


@dataclass(frozen=True)
class ConditionedRun:
    account: ConditioningAccount
    points: tuple[OperatingPoint, ...]
    overview: RunOverview

    @property
    def all_findings(self) -> tuple[Finding, ...]:
        """Run-level findings first, then each operating point's."""
        return self.account.findings + tuple(f for p in self.points for f in p.findings)


def condition_run(run: RigRun, settings: ConditioningSettings, rated_load_n: float | None = None) -> ConditionedRun:
    """Split `run` into operating points and reduce each to steady-state curves with findings."""
    spec = run.spec
    ch = run.channels
    n = run.n_samples
    t, fz = ch["time"], ch["fz"]
    sweep = spec.sweep
    x = ch[sweep]
    incl = ch.get("inclination", np.zeros(n))
    bin_width = settings.slip_bin_deg if sweep == "slip_angle" else settings.slip_ratio_bin
    dropped = dict.fromkeys(REASONS, 0)
    run_findings: list[Finding] = []

    # 1. operating points: load and camber levels, hinted or detected
    loads, load_detected = _levels(fz, spec.load_setpoints_n, resolution=0.03 * np.percentile(np.abs(fz), 95))
    cambers, _ = _levels(
        incl, spec.camber_setpoints_deg if spec.camber_setpoints_deg or "inclination" in ch else (0.0,), resolution=0.25
    )
    load_idx, load_ok = _assign(fz, loads, settings.load_tolerance_pct / 100.0 * loads)
    camber_idx, camber_ok = _assign(incl, cambers, np.full(cambers.size, settings.camber_tolerance_deg))
    # Combined slip: the other slip's set-points are a third level (None: one level, pure slip).
    held_name = spec.held_channel
    helds = np.asarray(spec.held_setpoints or (0.0,), dtype=float)
    held_idx, held_ok = np.zeros(n, dtype=int), np.ones(n, dtype=bool)
    if held_name is not None:
        tolerance = settings.camber_tolerance_deg if held_name == "slip_angle" else HELD_RATIO_TOLERANCE
        held_idx, held_ok = _assign(ch[held_name], helds, np.full(helds.size, tolerance))
    in_band = load_ok & camber_ok & held_ok
    if spec.load_setpoints_n:
        unmatched = _unmatched_levels(fz[~in_band], loads, settings.load_tolerance_pct, n)
        for level, count in unmatched:
            if level < 0.5 * loads.min():  # the rig's preload before and after the program
                run_findings.append(Finding(NOTE, f"{count} samples at a preload of about {level:.0f} N dropped"))
            else:
                run_findings.append(
                    Finding(
                        FINDING,
                        f"{count} samples hold a steady load of about {level:.0f} N, "
                        f"which matches no set-point; dropped as out of range",
                    )
                )
            dropped[REASON_UNMATCHED] += count
        mislabel = _load_unit_mislabel([level for level, _ in unmatched], loads, settings.load_tolerance_pct, spec)
        if mislabel:
            run_findings.append(Finding(FINDING, mislabel))
        dropped[REASON_TRANSITION] = int(np.count_nonzero(~in_band)) - dropped[REASON_UNMATCHED]
    else:
        dropped[REASON_TRANSITION] = int(np.count_nonzero(~in_band))
        run_findings.append(
            Finding(NOTE, "load steps detected from the data: " + ", ".join(f"{v:.0f} N" for v in loads))
        )

    # 2. settling at the start of every stay
    label = np.where(in_band, (load_idx * cambers.size + camber_idx) * helds.size + held_idx, -1)
    starts = np.flatnonzero(np.r_[True, label[1:] != label[:-1]])
    ends = np.r_[starts[1:], n]
    keep = np.zeros(n, dtype=bool)
    for s, e in zip(starts, ends):
        if label[s] < 0:
            continue
        settled = t[s:e] >= t[s] + settings.settling_s
        dropped[REASON_SETTLING] += int(np.count_nonzero(~settled))
        keep[s:e] = settled

    # 3. spikes in every force and moment channel present
    spike = np.zeros(n, dtype=bool)
    for name in ("fy", "fx", "mz", "mx", "my"):
        if name in ch:
            spike |= _spikes(ch[name], settings.spike_threshold_mad)
    spike &= keep
    dropped[REASON_SPIKE] = int(np.count_nonzero(spike))
    keep &= ~spike
    # Holds after a stop are kept apart for the relaxation time constant before step 4 drops them.
    hold_candidates = keep.copy()

    # 4. direction of the sweep at every sample; drop the run-in of sweeps that start from a hold
    slip_noise_sd = _noise_sd(x)
    direction = _sweep_direction(x, 0.1 * bin_width, slip_noise_sd)
    slip_rate = _slip_rate(t, x)
    run_in = _run_in(x, direction, settings.sweep_run_in_deg if sweep == "slip_angle" else settings.sweep_run_in_ratio)
    run_in &= keep
    dropped[REASON_RUN_IN] = int(np.count_nonzero(run_in))
    keep &= ~run_in
    slip_settling = _after_stop(t, direction, settings.slip_settling_s) & keep
    dropped[REASON_SLIP_SETTLING] = int(np.count_nonzero(slip_settling))
    keep &= ~slip_settling

    points = []
    for li, load in enumerate(loads):
        for ci, camber in enumerate(cambers):
            for hi, held in enumerate(helds):
                at_point = (load_idx == li) & (camber_idx == ci) & (held_idx == hi)
                sel = keep & at_point
                if not np.any(sel):
                    if spec.load_setpoints_n and ci == 0 and hi == 0:
                        run_findings.append(Finding(FINDING, f"set-point {load:.0f} N: no settled samples found"))
                    elif held_name is not None:
                        run_findings.append(Finding(FINDING, _no_held_samples(held_name, float(held), float(load))))
                    continue
                point, drops = _operating_point(
                    run, sel, direction, float(load), float(camber), bin_width, settings, rated_load_n, slip_noise_sd**2
                )
                if point is not None and held_name is not None:
                    point = replace(point, held_slip=float(held), held_slip_mean=float(np.mean(ch[held_name][sel])))
                if point is not None:
                    point = _with_relaxation_data(
                        point, run, sel, hold_candidates & at_point, direction, slip_rate, bin_width, settings
                    )
                for reason, count in drops.items():
                    dropped[reason] += count
                if point is not None:
                    points.append(point)

    # Rows the reader did not keep as samples (empty, or beyond any rig's range) are counted here
    # too, each reason with the lines it was found on: a reviewer sees every row of the file.
    for reason in dict.fromkeys(r.reason for r in run.rejected):
        rows = [r for r in run.rejected if r.reason == reason]
        dropped[reason] = len(rows)
        shown = ", ".join(f"line {r.line}" + (f" ({r.column} = {r.cell})" if r.column else "") for r in rows[:3])
        more = f" and {len(rows) - 3} more" if len(rows) > 3 else ""
        run_findings.append(Finding(FINDING, f"{len(rows)} row(s) dropped, {reason}: {shown}{more}"))
    n_dropped = sum(dropped.values())
    if dropped[REASON_SPIKE] > 0.01 * n:
        run_findings.append(
            Finding(
                FINDING, f"{dropped[REASON_SPIKE]} spikes removed ({100 * dropped[REASON_SPIKE] / n:.1f} % of samples)"
            )
        )
    n_rows = n + len(run.rejected)
    if n_dropped > 0.5 * n_rows:
        run_findings.append(Finding(FINDING, f"{100 * n_dropped / n_rows:.0f} % of the samples were dropped"))
    verdict, reasons = _verdict(points, run_findings)
    account = ConditioningAccount(
        run_index=spec.index,
        specimen=spec.specimen,
        source_file=spec.file,
        sha256=run.sha256,
        n_samples=n_rows,
        n_kept=n_rows - n_dropped,
        dropped=dropped,
        operating_points_found=len(points),
        load_levels_n=tuple(float(v) for v in loads),
        levels_detected=load_detected,
        findings=tuple(run_findings),
        verdict=verdict,
        verdict_reasons=tuple(reasons),
    )
    step = max(1, n // OVERVIEW_POINTS)
    overview = RunOverview(_frozen(t[::step]), _frozen(fz[::step]), _frozen(x[::step]), _frozen_bool(keep[::step]))
    return ConditionedRun(account, tuple(points), overview)


# --- operating points ------------------------------------------------------------------------


def _no_held_samples(held_name: str, held: float, load: float) -> str:
    what = f"slip angle {held:g}°" if held_name == "slip_angle" else f"slip ratio {held:g}"
    return f"held {what} at {load:.0f} N: no settled samples found"


def _operating_point(run: RigRun, sel, direction, load, camber, bin_width, settings, rated_load_n, x_noise_var):
    spec = run.spec
    ch = run.channels
    sweep = spec.sweep
    x = ch[sweep][sel]
    d = direction[sel]
    data = {name: ch[name][sel] for name in ("fz", "fy", "mz", "fx", "mx", "my") if name in ch}
    halves: dict[str, SlipCurve | None] = {}
    for label, sign in (("rising", 1), ("falling", -1)):
        m = d == sign
        if np.count_nonzero(m) == 0:
            halves[label] = None
            continue
        curve, _ = _bin_curve(
            sweep, x[m], {k: v[m] for k, v in data.items()}, bin_width, settings.min_samples_per_bin, x_noise_var
        )
        halves[label] = curve if curve.n_points else None
    hyst = _hysteresis(halves["rising"], halves["falling"], _lag_window(sweep, settings, bin_width))
    drops = {REASON_SPARSE: 0, REASON_STEP_MOVE: 0}
    held = d == 0
    if np.count_nonzero(held) > 0.5 * d.size:
        # A stepped sweep: the held steps are the steady-state data; the moves between them
        # are transitions.
        drops[REASON_STEP_MOVE] = int(np.count_nonzero(~held))
        steady, drops[REASON_SPARSE] = _bin_curve(
            sweep, x[held], {k: v[held] for k, v in data.items()}, bin_width, settings.min_samples_per_bin, x_noise_var
        )
    else:
        # A continuous sweep: undo the lag of each moving half (rising samples saw x − lag,
        # falling x + lag), then bin everything together; held samples need no shift.
        shift = 0.0 if hyst is None or hyst.slip_lag is None else hyst.slip_lag
        steady, drops[REASON_SPARSE] = _bin_curve(
            sweep, x - shift * d, data, bin_width, settings.min_samples_per_bin, x_noise_var
        )
    if steady.n_points == 0:
        return None, drops
    lines = run.line_numbers[sel]
    t = ch["time"][sel]
    main = data["fy" if sweep == "slip_angle" else "fx"]
    offsets = _offsets(steady) if sweep == "slip_angle" else None
    pressure = float(np.mean(ch["pressure"][sel])) if "pressure" in ch else None
    speed = float(np.mean(ch["speed"][sel])) if "speed" in ch else None
    moving = d[d != 0]
    reversals = int(np.count_nonzero(np.diff(moving) != 0))
    point = OperatingPoint(
        specimen=spec.specimen,
        run_index=spec.index,
        source_file=spec.file,
        sweep=sweep,
        rolling_direction=spec.rolling_direction,
        tested_at=spec.tested_at,
        load_n=load,
        camber_deg=camber,
        pressure_kpa=spec.pressure_kpa,
        mean_load_n=float(np.mean(data["fz"])),
        measured_pressure_kpa=pressure,
        mean_speed_kmh=speed,
        curve=steady,
        rising=halves["rising"],
        falling=halves["falling"],
        hysteresis=hyst,
        offsets=offsets,
        n_sweeps=(reversals + 1) / 2.0,
        raw_x=_frozen(x),
        raw_main=_frozen(main),
        first_line=int(lines.min()),
        last_line=int(lines.max()),
        n_samples_kept=int(x.size),
        time_span_s=(float(t.min()), float(t.max())),
    )
    findings = _coverage(point, settings, rated_load_n)
    return _replace_findings(point, findings), drops


def _slip_rate(t: np.ndarray, x: np.ndarray) -> np.ndarray:
    """Return dx/dt at every sample from the change over ±2 samples (NaN at the ends or no time step).

    The same span as :func:`_sweep_direction`, so a sample labelled moving has a rate measured
    over the same samples.
    """
    rate = np.full(x.size, np.nan)
    if x.size > 4:
        span = t[4:] - t[:-4]
        with np.errstate(divide="ignore", invalid="ignore"):
            rate[2:-2] = np.where(span > 0, (x[4:] - x[:-4]) / span, np.nan)
    return rate


def _lag_window(sweep: str, settings: ConditioningSettings, bin_width: float) -> float:
    """Return the half-width about zero slip the hysteresis is measured over (see :func:`_hysteresis`)."""
    run_in = settings.sweep_run_in_deg if sweep == "slip_angle" else settings.sweep_run_in_ratio
    return max(NEAR_ZERO[sweep], run_in + 1.5 * bin_width)


def _travel(x: np.ndarray, direction: np.ndarray) -> np.ndarray:
    """Return |x − x₀| with x₀ the slip where the current stretch of one direction began."""
    start = np.r_[True, direction[1:] != direction[:-1]]
    origin = np.where(start, np.arange(x.size), 0)
    np.maximum.accumulate(origin, out=origin)
    return np.abs(x - x[origin])


def _with_relaxation_data(point, run, sel, hold_sel, direction, slip_rate, bin_width, settings) -> OperatingPoint:
    """Return `point` with the sweep rate on its hysteresis, its moving samples near zero slip
    and the holds after each stop: what :mod:`dossier.conditioning.relaxation` measures from."""
    from dataclasses import replace

    ch = run.channels
    x, t = ch[point.sweep], ch["time"]
    main = ch["fy" if point.sweep == "slip_angle" else "fx"]
    window = _lag_window(point.sweep, settings, bin_width)
    d, xs, r = direction[sel], x[sel], slip_rate[sel]
    medians = []
    for sign in (1, -1):
        m = (d == sign) & (np.abs(xs) <= window) & np.isfinite(r)
        if np.any(m):
            medians.append(float(np.median(np.abs(r[m]))))
    h, samples = point.hysteresis, None
    if len(medians) == 2:
        # The lag measured is the mean of the two halves' lags, each rate·τ (first-order model):
        # so the rate that turns it into a time is the mean of the halves' rates.
        if h is not None:
            h = replace(h, sweep_rate_per_s=0.5 * (medians[0] + medians[1]))
        near = sel & (direction != 0) & (np.abs(x) <= window)
        samples = LagSamples(
            window=window,
            time_s=_frozen(t[near]),
            x=_frozen(x[near]),
            main=_frozen(main[near]),
            direction=_frozen(direction[near]),
            travel=_frozen(_travel(x, direction)[near]),
            rate_per_s=_frozen(slip_rate[near]),
            rate_rising_per_s=medians[0],
            rate_falling_per_s=medians[1],
        )
    holds = _holds(t, x, main, direction, slip_rate, hold_sel, run.line_numbers, bin_width)
    return replace(point, hysteresis=h, holds=holds, lag_samples=samples)


def _holds(t, x, main, direction, slip_rate, eligible, lines, bin_width) -> tuple[SlipHold, ...]:
    """Find every stop of the sweep inside `eligible` and keep the held samples after it.

    A stop is a held sample right after a moving one, both eligible (in the operating point's
    band, settled after the set-point change, not a spike). The hold lasts while the slip stays
    held and eligible, for at most :data:`HOLD_RECORD_S`; it starts where the slip is within a
    tenth of a bin of its held value (a rig decelerating slowly is still moving before that).
    Holds shorter than :data:`HOLD_MIN_SAMPLES` samples (a sweep's turning point) are skipped.
    """
    held = (direction == 0) & eligible
    stops = np.flatnonzero(held[1:] & (direction[:-1] != 0) & eligible[:-1]) + 1
    if stops.size == 0:
        return ()
    breaks = np.flatnonzero(~held)
    out = []
    for i in stops:
        k = int(np.searchsorted(breaks, i))
        end = int(breaks[k]) if k < breaks.size else held.size
        end = min(end, int(np.searchsorted(t, t[i] + HOLD_RECORD_S, side="right")))
        if end - i < HOLD_MIN_SAMPLES:
            continue
        value = float(np.median(x[i + (end - i) // 2 : end]))
        start = i + int(np.argmax(np.abs(x[i:end] - value) <= 0.1 * bin_width))
        if end - start < HOLD_MIN_SAMPLES:
            continue
        before = slip_rate[max(i - 3, 0) : i]
        before = before[np.isfinite(before)]
        out.append(
            SlipHold(
                time_s=_frozen(t[start:end]),
                main=_frozen(main[start:end]),
                slip=value,
                approach_rate_per_s=float(np.median(np.abs(before))) if before.size else None,
                first_line=int(lines[start]),
            )
        )
    return tuple(out)


def _replace_findings(point: OperatingPoint, findings) -> OperatingPoint:
    from dataclasses import replace

    return replace(point, findings=tuple(findings))


def _coverage(p: OperatingPoint, settings: ConditioningSettings, rated_load_n: float | None) -> list[Finding]:
    out = []
    c = p.curve
    where = f"{p.load_n / 1000:.1f} kN, camber {p.camber_deg:g}°"
    if c.n_points < settings.min_points_per_curve:
        out.append(
            Finding(
                BLOCKING,
                f"{where}: only {c.n_points} slip points (at least {settings.min_points_per_curve} needed to fit)",
            )
        )
    lateral = p.sweep == "slip_angle"
    unit = "°" if lateral else ""
    need = settings.min_slip_range_deg if lateral else MIN_SLIP_RATIO_RANGE
    reach = min(-c.x.min(), c.x.max())
    if reach < need:
        out.append(
            Finding(FINDING, f"{where}: slip range reaches only ±{reach:.3g}{unit} (at least ±{need:g}{unit} expected)")
        )
    main = c.main
    for side, m in (("positive", c.x > 0), ("negative", c.x < 0)):
        if np.count_nonzero(m) < 3:
            out.append(Finding(FINDING, f"{where}: no {side} slip measured"))
            continue
        xs, ys = c.x[m], np.abs(main[m])
        outer = np.argmax(np.abs(xs))
        if np.argmax(ys) == outer:
            out.append(
                Finding(
                    FINDING,
                    f"{where}: the sweep does not pass the peak on the {side} side; "
                    "peak friction there is a lower bound",
                )
            )
    if rated_load_n and p.load_n > rated_load_n * 1.001:
        out.append(
            Finding(
                FINDING,
                f"{where}: test load is above the rated load of {rated_load_n:.0f} N "
                f"({100 * (p.load_n / rated_load_n - 1):.0f} % over)",
            )
        )
    if p.measured_pressure_kpa is not None:
        dev = 100 * (p.measured_pressure_kpa / p.pressure_kpa - 1)
        if abs(dev) > settings.pressure_tolerance_pct:
            out.append(
                Finding(
                    FINDING,
                    f"{where}: measured pressure {p.measured_pressure_kpa:.0f} kPa is {dev:+.1f} % "
                    f"from the nominal {p.pressure_kpa:.0f} kPa",
                )
            )
    if p.rising is None or p.falling is None:
        out.append(Finding(NOTE, f"{where}: only one sweep direction measured; relaxation lag is not cancelled"))
    return out


def _verdict(points, run_findings) -> tuple[str, list[str]]:
    if not points:
        return UNUSABLE, ["no operating point survived conditioning"] + [
            f.text for f in run_findings if f.severity == FINDING
        ]
    blocking = [f.text for p in points for f in p.findings if f.severity == BLOCKING]
    if len(blocking) == len(points):
        return UNUSABLE, blocking
    reasons = blocking + [f.text for p in points for f in p.findings if f.severity == FINDING]
    reasons += [f.text for f in run_findings if f.severity == FINDING]
    return (WITH_FINDINGS, reasons) if reasons else (SOUND, [])


# --- levels --------------------------------------------------------------------------------

# Factors between force units that a mislabelled column shows as steady levels off the set-points
# by exactly that factor (NIST SP 811 B.8 for lbf; kgf by standard gravity).
_FORCE_FACTORS = {"lbf": units.LBF_IN_N, "kgf": units.STANDARD_GRAVITY_M_PER_S2, "kN": 1000.0}


def _load_unit_mislabel(levels, loads: np.ndarray, tolerance_pct: float, spec) -> str:
    """Say so when every set-point is a steady level times a unit factor: the load column's unit
    is written wrong ("load steps at 899, 1349, 1798 N: the set-points are 4.45 times these")."""
    if not levels or not loads.size:
        return ""
    for name, factor in _FORCE_FACTORS.items():
        tol = tolerance_pct / 100.0
        if all(any(abs(level * factor - sp) <= tol * sp for level in levels) for sp in loads):
            steps = ", ".join(f"{level:.0f}" for level in sorted(levels))
            return (
                f"load steps at {steps} N: the set-points are {factor:.4g} times these, which is the "
                f"{name}-to-N factor; the column is probably in {name} (manifest {spec.location}.columns.fz.unit)"
            )
    return ""


def _levels(values: np.ndarray, hints, resolution: float) -> tuple[np.ndarray, bool]:
    """Return the set-point levels: the hints, or levels detected from a histogram."""
    if hints:
        return np.asarray(sorted(hints), dtype=float), False
    return detect_levels(values, resolution), True


def detect_levels(values: np.ndarray, resolution: float) -> np.ndarray:
    """Find the steady levels of a stepped channel: histogram peaks holding ≥ 3 % of the samples."""
    resolution = max(float(resolution), 1e-9)
    lo, hi = float(values.min()), float(values.max())
    if hi - lo < resolution:
        return np.array([float(np.median(values))])
    edges = np.arange(lo, hi + resolution, resolution)
    counts, edges = np.histogram(values, bins=edges)
    levels = []
    threshold = DETECT_MIN_SHARE * values.size
    i = 0
    while i < counts.size:
        if counts[i] >= threshold:
            j = i
            while j + 1 < counts.size and counts[j + 1] >= threshold:
                j += 1
            block = (values >= edges[i]) & (values <= edges[j + 1])
            levels.append(float(np.median(values[block])))
            i = j + 1
        else:
            i += 1
    return np.asarray(levels)


def _assign(values, levels, tolerance):
    idx = np.argmin(np.abs(values[:, None] - levels[None, :]), axis=1)
    ok = np.abs(values - levels[idx]) <= tolerance[idx]
    return idx, ok


def _unmatched_levels(values, loads, tol_pct, n_total) -> list[tuple[float, int]]:
    if values.size == 0:
        return []
    found = detect_levels(values, 0.03 * max(np.percentile(np.abs(values), 95), 1.0))
    out = []
    for level in found:
        near = np.abs(values - level) <= tol_pct / 100.0 * max(abs(level), 1.0)
        count = int(np.count_nonzero(near))
        if count >= DETECT_MIN_SHARE * n_total and np.all(np.abs(loads - level) > tol_pct / 100.0 * loads):
            out.append((float(level), count))
    return out


# --- sweeps and curves -----------------------------------------------------------------------


def _noise_sd(x: np.ndarray) -> float:
    """Estimate the channel's noise standard deviation robustly from its second differences.

    A steady sweep rate (or a hold) has no second difference, so what is left is noise: the
    second difference of white noise has variance 6σ², and 1.4826·MAD estimates its spread.
    """
    if x.size < 4:
        return 0.0
    second = x[2:] - 2 * x[1:-1] + x[:-2]
    return float(1.4826 * np.median(np.abs(second - np.median(second))) / np.sqrt(6.0))


def _sweep_direction(x: np.ndarray, min_step: float, noise_sd: float) -> np.ndarray:
    """Label each sample +1 (rising), −1 (falling) or 0 (held still) by how the sweep moves there.

    Movement is the change over ±2 samples; it must exceed both `min_step` and five times the
    channel's own noise `noise_sd` (:func:`_noise_sd`), so that noise on a held slip angle is not
    mistaken for a sweep.
    """
    n = x.size
    d = np.zeros(n)
    if n > 4:
        d[2:-2] = x[4:] - x[:-4]
    eps = max(min_step, 5.0 * np.sqrt(2.0) * noise_sd) if n > 3 else min_step
    return np.where(d > eps, 1, np.where(d < -eps, -1, 0)).astype(np.int8)


def _after_stop(t: np.ndarray, direction: np.ndarray, window_s: float) -> np.ndarray:
    """Flag held samples less than `window_s` after the sweep last moved (the lag is decaying)."""
    moving = direction != 0
    idx = np.where(moving, np.arange(t.size), -1)
    np.maximum.accumulate(idx, out=idx)
    last_move_t = np.where(idx >= 0, t[np.maximum(idx, 0)], -np.inf)
    return ~moving & (t - last_move_t < window_s)


def _run_in(x: np.ndarray, direction: np.ndarray, travel: float) -> np.ndarray:
    """Flag the first `travel` of every moving stretch that starts from a hold (or the file start).

    When a sweep starts from a held slip, the relaxation lag builds up over the first few tenths
    of a degree; those samples belong to neither the lagging halves nor the steady state. A
    reversal at the end of a half-sweep is not a start: the lag there is continuous.
    """
    moving = direction != 0
    start = moving & np.r_[True, ~moving[:-1]]
    seg = np.cumsum(start)
    x0 = np.where(start, x, 0.0)
    origin = x0[np.flatnonzero(start)][np.maximum(seg - 1, 0)] if np.any(start) else np.zeros_like(x)
    return moving & (np.abs(x - origin) < travel)


def _bin_curve(sweep, x, data, width, min_count, x_noise_var: float = 0.0) -> tuple[SlipCurve, int]:
    """Average the samples in bins of the swept channel `x`; forces and moments are the bins'
    values at their mean slip (:func:`_spread_corrected`), the load the plain bin mean."""
    bins = np.round(x / width).astype(np.int64)
    uniq, inverse, counts = np.unique(bins, return_inverse=True, return_counts=True)
    ok = counts >= min_count
    sparse = int(counts[~ok].sum())

    def raw(v):
        return np.bincount(inverse, weights=v, minlength=uniq.size) / counts

    x_mean = raw(x)
    # Spread of the true slip within each bin: that of the recorded slip less its noise, which
    # sorts samples into bins but does not move the force (errors in the recorded x only).
    spread = np.maximum(raw((x - x_mean[inverse]) ** 2) - x_noise_var, 0.0)[ok]
    xs = x_mean[ok]

    def force(name):
        return _frozen(_spread_corrected(xs, raw(data[name])[ok], spread)) if name in data else None

    curve = SlipCurve(
        sweep,
        _frozen(xs),
        _frozen(raw(data["fz"])[ok]),
        force("fy"),
        force("mz"),
        force("fx"),
        _frozen(counts[ok]),
        uniq[ok],
        force("mx"),
        force("my"),
    )
    return curve, sparse


def _spread_corrected(x: np.ndarray, y: np.ndarray, spread: np.ndarray) -> np.ndarray:
    """Return the bin means `y` moved to the curve's value at the bins' mean slip `x`.

    The mean of a curved F over samples spread about x̄ with variance s² is F(x̄) + ½F″(x̄)s² (a
    second-order Taylor expansion about x̄; the first-order term averages to zero). Over a
    0.01 slip-ratio bin that bias flattens the curve near zero and lowers the slip stiffness by
    about 0.25 % (noise-free synthetic sessions); F″ is read from a quadratic through each bin
    and up to two neighbours on either side, and the bias removed.
    """
    return y - 0.5 * _local_curvature(x, y) * spread


def _local_curvature(x: np.ndarray, y: np.ndarray) -> np.ndarray:
    """Return d²y/dx² at each point from a least-squares quadratic through it and its neighbours."""
    n = x.size
    if n < 3:
        return np.zeros(n)
    # Normal equations of y ≈ a + b·u + c·u² with u = (x_j − x_i)/h over the window j = i−2..i+2
    # (clipped at the ends), built for every i at once; h, the typical spacing, keeps them well
    # conditioned whatever the unit of x.
    h = float(np.median(np.diff(x))) or 1.0
    m = np.zeros((n, 3, 3))
    r = np.zeros((n, 3))
    idx = np.arange(n)
    for k in range(-2, 3):
        j = idx + k
        inside = (j >= 0) & (j < n)
        jj = np.clip(j, 0, n - 1)
        u = (x[jj] - x) / h
        powers = np.stack([np.ones(n), u, u**2], axis=1) * inside[:, None]
        m += powers[:, :, None] * powers[:, None, :]
        r += powers * y[jj][:, None]
    # pinv: a window whose points cannot carry a quadratic gets the least-norm answer, not an error
    return 2.0 * (np.linalg.pinv(m) @ r[:, :, None])[:, 2, 0] / h**2


# Near zero slip: |x| ≤ 2° (slip angle) or 0.02 (slip ratio), narrow enough to stay close to linear.
NEAR_ZERO = {"slip_angle": 2.0, "slip_ratio": 0.02}


def _line_near_zero(c: SlipCurve, y: np.ndarray | None, half: float | None = None) -> tuple[float, float] | None:
    """Return (value at zero, slope) of a straight line through the points with |x| ≤ `half`
    (default :data:`NEAR_ZERO`); None without points on both sides of zero."""
    if y is None:
        return None
    half = NEAR_ZERO[c.sweep] if half is None else half
    near = np.abs(c.x) <= half
    if np.count_nonzero(near) < 3 or not (np.any(c.x[near] < 0) and np.any(c.x[near] > 0)):
        return None
    slope, value = np.polyfit(c.x[near], y[near], 1)
    return float(value), float(slope)


def _hysteresis(rising, falling, half: float) -> Hysteresis | None:
    """Compare straight lines through each half within |x| ≤ `half` at zero slip.

    `half` must reach past the run-in a sweep from a hold drops from one half (rising, from
    zero), or that half has no point on the far side of zero and no lag is measured: at a
    slip-ratio run-in of 0.02 and a window of 0.02 the lag went uncorrected, and a steady curve
    made of the falling half alone near zero (+K·lag there) biased the slip stiffness.
    """
    if rising is None or falling is None:
        return None
    lr, lf = _line_near_zero(rising, rising.main, half), _line_near_zero(falling, falling.main, half)
    if lr is None or lf is None:
        return None
    diff = lr[0] - lf[0]
    mr, mf = _line_near_zero(rising, rising.mz_nm, half), _line_near_zero(falling, falling.mz_nm, half)
    k = 0.5 * (lr[1] + lf[1])
    # Rising half sees x − lag, falling half x + lag: F_r(0) − F_f(0) ≈ −2 k lag.
    lag = None if k == 0 else float(-diff / (2.0 * k))
    return Hysteresis(float(diff), None if mr is None or mf is None else float(mr[0] - mf[0]), lag, window=float(half))


def _offsets(c: SlipCurve) -> ZeroSlipOffsets:
    """Residual force and moment from straight lines through the steady curve near zero slip."""
    fy_line = _line_near_zero(c, c.fy_n)
    mz_line = _line_near_zero(c, c.mz_nm)
    fy0 = None if fy_line is None else fy_line[0]
    mz0 = None if mz_line is None else mz_line[0]
    rcf = rat = None
    if fy_line and mz_line and fy_line[1] != 0 and mz_line[1] != 0:
        x_mz0 = -mz_line[0] / mz_line[1]  # slip angle where Mz = 0
        x_fy0 = -fy_line[0] / fy_line[1]  # slip angle where Fy = 0
        rcf = fy_line[0] + fy_line[1] * x_mz0
        rat = mz_line[0] + mz_line[1] * x_fy0
    return ZeroSlipOffsets(fy0, mz0, rcf, rat)


# --- spikes --------------------------------------------------------------------------------


def _spikes(x: np.ndarray, threshold: float) -> np.ndarray:
    """Flag isolated spikes: samples far from the mean of their two neighbours.

    The residual r_i = x_i − (x_{i−1} + x_{i+1})/2 removes the local trend, so a spike on the
    steep part of a sweep is as visible as one on a plateau (a moving-median filter misses
    it there). A sample is flagged when |r_i| exceeds `threshold` robust standard deviations
    (1.4826·MAD of r over the run), is the largest |r| among its neighbours (so the two
    neighbours, which see half of the spike, are kept) and its neighbours echo it with the
    opposite sign (so a kink, where a sweep starts from a hold, is not taken for a spike).
    """
    if x.size < 3:
        return np.zeros(x.size, dtype=bool)
    r = np.zeros_like(x)
    r[1:-1] = x[1:-1] - 0.5 * (x[:-2] + x[2:])
    a = np.abs(r)
    scale = 1.4826 * np.median(np.abs(r[1:-1] - np.median(r[1:-1]))) + 1e-12
    local_max = np.zeros(x.size, dtype=bool)
    local_max[1:-1] = (a[1:-1] >= a[:-2]) & (a[1:-1] >= a[2:])
    # Both neighbours of a spike see about half of it with the opposite sign; a kink in the
    # signal (a sweep starting from a hold) has neighbours near zero and is not a spike.
    echoed = np.zeros(x.size, dtype=bool)
    echoed[1:-1] = (r[:-2] * r[1:-1] < 0) & (r[2:] * r[1:-1] < 0) & (np.minimum(a[:-2], a[2:]) > 0.25 * a[1:-1])
    return (a > threshold * scale) & local_max & echoed


def _frozen(a: np.ndarray) -> np.ndarray:
    a = np.array(a, dtype=float)
    a.setflags(write=False)
    return a


def _frozen_bool(a: np.ndarray) -> np.ndarray:
    a = np.array(a, dtype=bool)
    a.setflags(write=False)
    return a
