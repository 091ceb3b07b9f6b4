"""Conditioning: from a raw rig run to clean slip curves, one per operating point.

Steps, each recorded in the run's :class:`ConditioningAccount`:

1. assign every sample to the nearest nominal load (and camber) set-point of the manifest;
   samples outside the tolerance band are load transitions and are dropped;
2. drop the first ``settling_s`` seconds of every stay at a set-point (load settling);
3. remove isolated spikes in Fy and Mz: a sample far (k robust standard deviations) from the
   mean of its two neighbours in time, see :func:`_spikes`;
4. reduce each slip sweep to a curve by averaging in slip-angle bins. Averaging the rising
   and falling halves of a sweep in the same bin is a first steady-state estimate: the
   relaxation lag shifts the two halves in opposite directions and cancels to first order.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

from .ingest import RigRun
from .manifest import ConditioningSettings

REASON_TRANSITION = "load or camber off set-point (transition)"
REASON_SETTLING = "settling after a set-point change"
REASON_SPIKE = "spike (neighbour test)"
REASON_SPARSE = "too few samples in slip bin"


@dataclass(frozen=True)
class SlipCurve:
    """A conditioned slip sweep: bin means, all arrays of equal length, sorted by slip angle."""

    slip_angle_deg: np.ndarray
    fy_n: np.ndarray
    mz_nm: np.ndarray | None
    fz_n: np.ndarray
    samples_per_bin: np.ndarray

    @property
    def n_points(self) -> int:
        return int(self.slip_angle_deg.size)


@dataclass(frozen=True)
class OperatingPoint:
    """One specimen at one nominal load, camber and pressure."""

    specimen: str
    run_index: int
    source_file: str
    load_n: float  # nominal set-point
    camber_deg: float
    pressure_kpa: float
    mean_load_n: float  # measured mean over the kept samples
    curve: SlipCurve
    raw_slip_angle_deg: np.ndarray  # kept samples, for plotting the data cloud
    raw_fy_n: np.ndarray
    first_line: int  # range of source lines the kept samples came from
    last_line: int
    n_samples_kept: int

    @property
    def key(self) -> tuple[str, float, float, float]:
        return (self.specimen, self.load_n, self.camber_deg, self.pressure_kpa)


@dataclass(frozen=True)
class ConditioningAccount:
    """What conditioning did to one run: samples in, kept, and dropped by reason."""

    run_index: int
    specimen: str
    source_file: str
    sha256: str
    n_samples: int
    n_kept: int
    dropped: dict[str, int] = field(default_factory=dict)
    operating_points_found: int = 0


@dataclass(frozen=True)
class ConditionedRun:
    account: ConditioningAccount
    points: tuple[OperatingPoint, ...]


def condition_run(run: RigRun, settings: ConditioningSettings) -> ConditionedRun:
    """Split `run` into operating points and reduce each to a clean slip curve."""
    spec = run.spec
    ch = run.channels
    n = run.n_samples
    t, fz, slip, fy = ch["time"], ch["fz"], ch["slip_angle"], ch["fy"]
    mz = ch.get("mz")
    incl = ch.get("inclination", np.zeros(n))
    dropped = {REASON_TRANSITION: 0, REASON_SETTLING: 0, REASON_SPIKE: 0, REASON_SPARSE: 0}

    loads = np.asarray(spec.load_setpoints_n)
    load_idx = np.argmin(np.abs(fz[:, None] - loads[None, :]), axis=1)
    in_band = np.abs(fz - loads[load_idx]) <= settings.load_tolerance_pct / 100.0 * loads[load_idx]
    cambers = np.asarray(spec.camber_setpoints_deg)
    camber_idx = np.argmin(np.abs(incl[:, None] - cambers[None, :]), axis=1)
    in_band &= np.abs(incl - cambers[camber_idx]) <= settings.camber_tolerance_deg
    dropped[REASON_TRANSITION] = int(np.count_nonzero(~in_band))

    # A "stay" is a maximal block of consecutive in-band samples at one (load, camber) pair.
    label = np.where(in_band, load_idx * len(cambers) + camber_idx, -1)
    starts = np.flatnonzero(np.r_[True, label[1:] != label[:-1]])
    ends = np.r_[starts[1:], n]
    keep = np.zeros(n, dtype=bool)
    for s, e in zip(starts, ends):
        if label[s] < 0:
            continue
        settled = t[s:e] >= t[s] + settings.settling_s
        dropped[REASON_SETTLING] += int(np.count_nonzero(~settled))
        keep[s:e] = settled

    spike = _spikes(fy, settings.spike_threshold_mad)
    if mz is not None:
        spike |= _spikes(mz, settings.spike_threshold_mad)
    spike &= keep
    dropped[REASON_SPIKE] = int(np.count_nonzero(spike))
    keep &= ~spike

    points = []
    for li, load in enumerate(loads):
        for ci, camber in enumerate(cambers):
            sel = keep & (load_idx == li) & (camber_idx == ci)
            if not np.any(sel):
                continue
            curve, sparse = _bin_curve(slip[sel], fy[sel], None if mz is None else mz[sel], fz[sel],
                                       settings.slip_bin_deg, settings.min_samples_per_bin)
            dropped[REASON_SPARSE] += sparse
            if curve.n_points == 0:
                continue
            lines = run.line_numbers[sel]
            points.append(OperatingPoint(
                specimen=spec.specimen, run_index=spec.index, source_file=spec.file,
                load_n=float(load), camber_deg=float(camber), pressure_kpa=spec.pressure_kpa,
                mean_load_n=float(np.mean(fz[sel])), curve=curve,
                raw_slip_angle_deg=_frozen(slip[sel]), raw_fy_n=_frozen(fy[sel]),
                first_line=int(lines.min()), last_line=int(lines.max()),
                n_samples_kept=int(np.count_nonzero(sel)) ,
            ))
    n_kept = int(np.count_nonzero(keep)) - dropped[REASON_SPARSE]
    account = ConditioningAccount(
        run_index=spec.index, specimen=spec.specimen, source_file=spec.file, sha256=run.sha256,
        n_samples=n, n_kept=n_kept, dropped={k: v for k, v in dropped.items()},
        operating_points_found=len(points),
    )
    return ConditionedRun(account, tuple(points))


def _spikes(x: np.ndarray, threshold: float) -> np.ndarray:
    """Flag isolated spikes: samples far from the mean of their two neighbours.

    The residual r_i = x_i − (x_{i−1} + x_{i+1})/2 removes the local trend, so a spike on the
    steep part of a sweep is as visible as one on a plateau (a moving-median filter misses
    it there). A sample is flagged when |r_i| exceeds `threshold` robust standard deviations
    (1.4826·MAD of r over the run) and is the largest |r| among its neighbours, so the two
    neighbours of a spike, which see half of it, are kept.
    """
    if x.size < 3:
        return np.zeros(x.size, dtype=bool)
    r = np.zeros_like(x)
    r[1:-1] = x[1:-1] - 0.5 * (x[:-2] + x[2:])
    a = np.abs(r)
    scale = 1.4826 * np.median(np.abs(r[1:-1] - np.median(r[1:-1]))) + 1e-12
    local_max = np.zeros(x.size, dtype=bool)
    local_max[1:-1] = (a[1:-1] >= a[:-2]) & (a[1:-1] >= a[2:])
    return (a > threshold * scale) & local_max


def _bin_curve(slip, fy, mz, fz, width, min_count) -> tuple[SlipCurve, int]:
    bins = np.round(slip / width).astype(np.int64)
    uniq, inverse, counts = np.unique(bins, return_inverse=True, return_counts=True)
    ok = counts >= min_count
    sparse = int(counts[~ok].sum())

    def mean(v):
        return (np.bincount(inverse, weights=v, minlength=uniq.size) / counts)[ok]

    curve = SlipCurve(
        slip_angle_deg=_frozen(mean(slip)), fy_n=_frozen(mean(fy)),
        mz_nm=None if mz is None else _frozen(mean(mz)), fz_n=_frozen(mean(fz)),
        samples_per_bin=_frozen(counts[ok]),
    )
    return curve, sparse


def _frozen(a: np.ndarray) -> np.ndarray:
    a = np.array(a, dtype=float)
    a.setflags(write=False)
    return a
