"""The reference conditions a project's results are given at, as the manifest sets them or as
they follow from it: the nominal load Fz0 and pressure p0, each specimen's rated load and
unloaded radius."""

from __future__ import annotations

import statistics
from collections.abc import Sequence

from ..common.errors import StageError
from ..standards.sidewall import parse_size
from .manifest import Manifest


def nominal_load_n(manifest: Manifest, detected_loads_n: Sequence[float] = ()) -> float:
    """Fz0: the manifest's choice, else a load that was measured: the set-point nearest the median
    of all nominal load set-points (ties: the lower), a run without set-points contributing the
    load levels detected in its data (`detected_loads_n`)."""
    if manifest.fit.nominal_load_n:
        return manifest.fit.nominal_load_n
    declared = [load for r in manifest.runs for load in (r.load_setpoints_n or ())]
    loads = declared + (list(detected_loads_n) if any(r.load_setpoints_n is None for r in manifest.runs) else [])
    if not loads:
        raise StageError("no load level was declared or found in the data; set [fit] nominal_load_n")
    median = statistics.median(loads)
    return float(min(sorted(set(loads)), key=lambda load: abs(load - median)))


def nominal_pressure_kpa(manifest: Manifest) -> float:
    """p0: the manifest's choice, else the most common run pressure (to 1 kPa; ties: the lowest)."""
    if manifest.fit.nominal_pressure_kpa:
        return manifest.fit.nominal_pressure_kpa
    rounded = [round(r.pressure_kpa) for r in manifest.runs]
    best = max(sorted(set(rounded)), key=rounded.count)
    return float(next(r.pressure_kpa for r in manifest.runs if round(r.pressure_kpa) == best))


def specimen_pressure_kpa(manifest: Manifest, specimen_id: str) -> float:
    """A specimen's own nominal pressure, the one its metrics are given at: its manifest key
    ``nominal_pressure_kpa``, else p0 when it was tested there (to 1 kPa), else the pressure of most
    of its runs (ties: the one nearest p0, then the lower). A specimen tested only at its own
    pressure is never labelled with one it did not see."""
    s = manifest.specimen(specimen_id)
    if s.nominal_pressure_kpa:
        return s.nominal_pressure_kpa
    p0 = nominal_pressure_kpa(manifest)
    own = [r.pressure_kpa for r in manifest.runs if r.specimen == specimen_id]
    rounded = [round(p) for p in own]
    if not own or round(p0) in rounded:
        return p0
    best = max(sorted(set(rounded), key=lambda p: (abs(p - p0), p)), key=rounded.count)
    return float(next(p for p in own if round(p) == best))


def specimen_camber_deg(manifest: Manifest, specimen_id: str, tested_cambers_deg: Sequence[float]) -> float:
    """A specimen's own nominal camber, the one its metrics are given at: its manifest key
    ``nominal_camber_deg``, else zero when it was tested there (to 0.01°) or has no camber data, else
    the camber most of its operating points were tested at (`tested_cambers_deg`, one per point;
    ties: the one nearest zero, then the lower)."""
    s = manifest.specimen(specimen_id)
    if s.nominal_camber_deg is not None:
        return s.nominal_camber_deg
    rounded = [round(c, 2) for c in tested_cambers_deg]
    if not rounded or 0.0 in rounded:
        return 0.0
    best = max(sorted(set(rounded), key=lambda c: (abs(c), c)), key=rounded.count)
    return float(best)


def rated_load_n(specimen) -> float | None:
    """The rated load per tire: the manifest's value, else from the load index of the size."""
    if specimen.rated_load_n:
        return specimen.rated_load_n
    size = parse_size(specimen.size)
    return None if size is None else size.rated_load_n


def unloaded_radius_m(manifest: Manifest, specimen_id: str) -> float:
    """R0 of a specimen: the manifest's value, else from its size designation."""
    s = manifest.specimen(specimen_id)
    if s.unloaded_radius_m:
        return s.unloaded_radius_m
    size = parse_size(s.size)
    if size is None:
        i = manifest.specimens.index(s)
        raise StageError(
            f"specimens[{i}].size: cannot read a size from {s.size!r} to get the unloaded radius "
            f"for the aligning-moment model; set specimens[{i}].unloaded_radius_m"
        )
    if size.unloaded_radius_m is None:
        i = manifest.specimens.index(s)
        raise StageError(
            f"specimens[{i}].size: {s.size!r} is a numeric size, which states no aspect ratio and so no "
            f"unloaded radius for the aligning-moment model; set specimens[{i}].unloaded_radius_m"
        )
    return size.unloaded_radius_m
