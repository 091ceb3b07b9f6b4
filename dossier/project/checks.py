"""Cross-reference checks of a validated manifest: what one key says about another.

Duplicate ids, references to unknown specimens, a sweep's required channels, target windows,
sign-off, drift control, vehicle geometry. Pure: nothing here reads a file (the loader checks
that the files the manifest names exist and reads them, :mod:`dossier.project.load`).
"""

from __future__ import annotations

from ..common.errors import Problem
from ..common.names import slug
from ..standards import sidewall
from .manifest import (
    COMBINED_CHANNELS,
    HELD_SETPOINTS_KEY,
    HELD_SLIP,
    REQUIRED_CHANNELS,
    SWEEP_CHANNELS,
    quantity_value,
)
from .validation import join_path, suggest


def check_references(data: dict, problems: list[Problem]) -> None:
    """Append a located problem for every inconsistency between the keys of `data`."""
    specimens = data.get("specimens") or []
    ids = [s["id"] for s in specimens if s and s.get("id")]
    seen: set[str] = set()
    named: dict[str, str] = {}  # file-name form -> the first id that has it
    for i, s in enumerate(specimens):
        if s and s.get("id") in seen:
            problems.append(Problem(f"specimens[{i}].id", f"duplicate specimen id {s['id']!r}"))
        elif s and s.get("id"):
            sid = s["id"]
            seen.add(sid)
            form = slug(sid)
            if not form:
                problems.append(Problem(f"specimens[{i}].id", f"must contain a letter or a digit; got {sid!r}"))
            elif form in named:
                problems.append(
                    Problem(
                        f"specimens[{i}].id",
                        f"{sid!r} and {named[form]!r} would share the file and "
                        f"page names '{form}' (ids are told apart by their letters and digits); "
                        "rename one",
                    )
                )
            else:
                named[form] = sid
    for i, s in enumerate(specimens):
        if s and s.get("size") and sidewall.parse_size(s["size"]) is None:
            problems.append(
                Problem(
                    f"specimens[{i}].size",
                    f"cannot read {s['size']!r} as a size designation; "
                    "expected e.g. '225/45 R17 94W', 'LT265/75R16 123/120R' or '295/75R22.5 144/141L'",
                )
            )
        if s and s.get("tin"):
            try:
                sidewall.parse_tin(s["tin"])
            except sidewall.SidewallError as exc:
                problems.append(Problem(f"specimens[{i}].tin", str(exc)))
    baselines = [s for s in specimens if s and s.get("role") == "baseline"]
    if specimens and len(baselines) > 1:
        problems.append(Problem("specimens", f"at most one specimen may have role 'baseline'; got {len(baselines)}"))
    for i, run in enumerate(data.get("runs") or []):
        if not run:
            continue
        sid = run.get("specimen")
        if sid and ids and sid not in ids:
            problems.append(
                Problem(
                    f"runs[{i}].specimen",
                    f"no specimen with id {sid!r}{suggest(sid, ids)}; known ids: {', '.join(ids)}",
                )
            )
        columns = run.get("columns") or {}
        sweep = run.get("sweep") or "slip_angle"
        if run.get("columns") is not None:
            for ch in REQUIRED_CHANNELS + SWEEP_CHANNELS.get(sweep, ()):
                if ch not in columns:
                    problems.append(
                        Problem(
                            f"runs[{i}].columns.{ch}",
                            f"is required (a {sweep} run needs {', '.join(REQUIRED_CHANNELS + SWEEP_CHANNELS[sweep])})",
                        )
                    )
        own_key = HELD_SETPOINTS_KEY.get(sweep)  # the set-points of the swept slip itself: not held
        if own_key and run.get(own_key):
            other = HELD_SETPOINTS_KEY[HELD_SLIP[sweep]]
            problems.append(
                Problem(
                    f"runs[{i}].{own_key}",
                    f"a {sweep} run sweeps this slip and cannot hold it at set-points; combined slip holds the "
                    f"other one: {other}",
                )
            )
        held_key = HELD_SETPOINTS_KEY.get(HELD_SLIP.get(sweep, ""), "")
        if run.get(held_key) and run.get("columns") is not None:
            for ch in COMBINED_CHANNELS:
                if ch not in columns:
                    problems.append(
                        Problem(
                            f"runs[{i}].columns.{ch}",
                            f"is required: a combined-slip run ({held_key} given) needs {', '.join(COMBINED_CHANNELS)}",
                        )
                    )
        cambers = run.get("camber_setpoints_deg") or []
        if run.get("columns") is not None and len(cambers) > 1 and "inclination" not in columns:
            problems.append(
                Problem(
                    f"runs[{i}].columns.inclination", f"is required when the run has {len(cambers)} camber set-points"
                )
            )
        if run.get("delimiter") and run.get("decimal") and run["delimiter"] == run["decimal"]:
            problems.append(Problem(f"runs[{i}].decimal", f"cannot equal the delimiter {run['delimiter']!r}"))
    for i, t in enumerate(data.get("targets") or []):
        if not t:
            continue
        kinds = [k for k in ("minimum", "maximum") if t.get(k) is not None]
        nominal = t.get("nominal") is not None or t.get("tolerance") is not None
        if nominal and kinds:
            problems.append(Problem(f"targets[{i}]", "give either minimum/maximum or nominal and tolerance, not both"))
        elif nominal and (t.get("nominal") is None or t.get("tolerance") is None):
            problems.append(Problem(f"targets[{i}]", "nominal and tolerance go together; one of them is missing"))
        elif not nominal and not kinds:
            problems.append(Problem(f"targets[{i}]", "needs a window: minimum, maximum, or nominal and tolerance"))
        elif t.get("minimum") is not None and t.get("maximum") is not None and t["minimum"] > t["maximum"]:
            problems.append(
                Problem(f"targets[{i}].minimum", f"is above the maximum ({t['minimum']!r} > {t['maximum']!r})")
            )
        for j, sid in enumerate(t.get("specimens") or []):
            if sid and ids and sid not in ids:
                problems.append(
                    Problem(f"targets[{i}].specimens[{j}]", f"no specimen with id {sid!r}{suggest(sid, ids)}")
                )
    so = data.get("signoff")
    if so and so.get("status") == "released":
        approvers = [p for p in (so.get("people") or []) if p and p.get("role") == "approver" and p.get("date")]
        if not approvers:
            problems.append(Problem("signoff.people", "a released revision needs an approver with a date"))
    revs = [r.get("revision") for r in (data.get("revisions") or []) if r]
    doc = data.get("document") or {}
    if revs and doc.get("revision") and doc["revision"] not in revs:
        problems.append(Problem("revisions", f"has no entry for the document's revision {doc['revision']!r}"))
    v = data.get("vehicle")
    if v:
        _check_vehicle(v, specimens, problems)
    drift = data.get("drift")
    if drift and drift.get("control") and ids:
        ctl = drift["control"]
        roles = {s["id"]: s.get("role") for s in specimens if s and s.get("id")}
        if ctl not in roles:
            problems.append(Problem("drift.control", f"no specimen with id {ctl!r}{suggest(ctl, ids)}"))
        elif roles[ctl] != "control":
            problems.append(Problem("drift.control", f"specimen {ctl!r} must have role 'control'; got {roles[ctl]!r}"))
        untimed = [i for i, r in enumerate(data.get("runs") or []) if r and not r.get("tested_at")]
        if untimed:
            problems.append(
                Problem(
                    f"runs[{untimed[0]}].tested_at",
                    "is required for every run when [drift] is set (drift is estimated over time)",
                )
            )
    times = [(i, r["tested_at"]) for i, r in enumerate(data.get("runs") or []) if r and r.get("tested_at")]
    zoned = [i for i, t in times if t.tzinfo is not None]
    if zoned and len(zoned) < len(times):
        local = next(i for i, t in times if t.tzinfo is None)
        problems.append(
            Problem(
                f"runs[{zoned[0]}].tested_at",
                f"has a UTC offset but runs[{local}].tested_at has none; "
                "give every run's tested_at with an offset (2026-11-03T09:40:00+01:00) or none",
            )
        )
    used = {r.get("specimen") for r in (data.get("runs") or []) if r}
    for i, s in enumerate(specimens):
        if s and s.get("id") and s["id"] not in used and data.get("runs"):
            problems.append(
                Problem(f"specimens[{i}]", f"specimen {s['id']!r} has no rig run; add a [[runs]] entry or remove it")
            )
    run_labs = sorted({r.get("lab") or "" for r in (data.get("runs") or []) if r})
    for name in data.get("labs") or {}:
        if name not in run_labs:
            lab_names = ", ".join(repr(n) for n in run_labs if n) or "none (no run gives a lab)"
            problems.append(
                Problem(
                    join_path("labs", name),
                    f"no run names this lab{suggest(name, [n for n in run_labs if n])}; the runs' labs are {lab_names}",
                )
            )


def _check_vehicle(v: dict, specimens: list, problems: list[Problem]) -> None:
    """Axle loads given one way, axles front to back, each fitment naming every axle once with a
    declared specimen, replacements naming another fitment, wide-base sizes never in dual pairs."""
    axles = [a for a in (v.get("axles") or []) if a]
    names = [a.get("name") for a in axles if a.get("name")]
    for i, a in enumerate(axles):
        if a.get("name") in names[:i]:
            problems.append(Problem(f"vehicle.axles[{i}].name", f"duplicate axle name {a['name']!r}"))
    by_mass = v.get("mass") is not None or v.get("cg_to_front_axle") is not None
    loaded = [i for i, a in enumerate(axles) if a.get("load") is not None]
    if by_mass:
        if v.get("mass") is None or v.get("cg_to_front_axle") is None:
            problems.append(Problem("vehicle", "mass and cg_to_front_axle go together; one of them is missing"))
        elif len(axles) != 2:
            problems.append(
                Problem(
                    "vehicle.mass",
                    f"gives axle loads for two axles only; got {len(axles)} axles: give each axle its load",
                )
            )
        elif loaded:
            problems.append(
                Problem(
                    f"vehicle.axles[{loaded[0]}].load",
                    "give either the vehicle's mass and cg_to_front_axle or each axle's load, not both",
                )
            )
        elif all(a.get("from_front") for a in axles):
            L = quantity_value(axles[1]["from_front"], "length") - quantity_value(axles[0]["from_front"], "length")
            b = quantity_value(v["cg_to_front_axle"], "length")
            if not 0 < b < L:
                problems.append(
                    Problem("vehicle.cg_to_front_axle", f"must lie between the axles (0 … {L:.3f} m); got {b:.3f} m")
                )
    else:
        for i, a in enumerate(axles):
            if a.get("load") is None:
                problems.append(
                    Problem(
                        f"vehicle.axles[{i}].load",
                        "is required (or give the vehicle's mass and cg_to_front_axle for two axles)",
                    )
                )
    positions = [quantity_value(a["from_front"], "length") for a in axles if a.get("from_front")]
    if len(positions) == len(axles):
        for i in range(1, len(positions)):
            if positions[i] <= positions[i - 1]:
                problems.append(
                    Problem(
                        f"vehicle.axles[{i}].from_front",
                        f"axles go front to back: must be more than {positions[i - 1]:.3f} m (axle {i - 1}); "
                        f"got {positions[i]:.3f} m",
                    )
                )
    if axles and not any(
        a.get("steered") or (a.get("steered") is None and a.get("position") == "steer") for a in axles
    ):
        problems.append(Problem("vehicle.axles", "no axle steers: give one position = 'steer' or steered = true"))
    sizes = {s["id"]: s.get("size") for s in specimens if s and s.get("id")}
    fitments = [f for f in (v.get("fitments") or []) if f]
    fit_names = [f.get("name") for f in fitments if f.get("name")]
    for i, f in enumerate(fitments):
        where = f"vehicle.fitments[{i}]"
        if f.get("name") in fit_names[:i]:
            problems.append(Problem(f"{where}.name", f"duplicate fitment name {f['name']!r}"))
        elif f.get("name"):
            twin = next((n for n in fit_names[:i] if slug(n) == slug(f["name"])), None)
            if twin is not None:
                problems.append(
                    Problem(
                        f"{where}.name",
                        f"{f['name']!r} and {twin!r} differ only in punctuation or case, which the "
                        "provenance record and the file names may not keep apart: rename one",
                    )
                )
        rep = f.get("replaces")
        if rep is not None and (rep not in fit_names or rep == f.get("name")):
            others = [n for n in fit_names if n != f.get("name")]
            problems.append(
                Problem(f"{where}.replaces", f"must name another fitment; got {rep!r}{suggest(rep, others)}")
            )
        mounted = f.get("mounted") or {}
        for axle, m in mounted.items():
            at = join_path(f"{where}.mounted", axle)
            if axle not in names:
                problems.append(Problem(at, f"no axle named {axle!r}{suggest(axle, names)}"))
            if not m or not m.get("specimen"):
                continue
            sid = m["specimen"]
            if sid not in sizes:
                problems.append(Problem(f"{at}.specimen", f"no specimen with id {sid!r}{suggest(sid, list(sizes))}"))
                continue
            size = sidewall.parse_size(sizes[sid] or "")
            if m.get("assembly") == "dual" and size is not None and size.wide_base:
                problems.append(
                    Problem(
                        f"{at}.assembly",
                        f"{sid} ({sizes[sid]}) is a wide-base single, fitted in place of a dual pair, never in one; "
                        "expected 'wide-base single'",
                    )
                )
            if m.get("assembly") != "dual" and m.get("dual_spacing") is not None:
                problems.append(Problem(f"{at}.dual_spacing", "applies to a dual assembly only"))
        missing = [n for n in names if n not in mounted]
        if f.get("mounted") is not None and missing:
            problems.append(
                Problem(f"{where}.mounted", f"names no mounting for axle(s) {', '.join(map(repr, missing))}")
            )
