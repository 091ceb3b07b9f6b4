"""Fuzzing a project as a hostile or careless user would: mutated rig files and manifests.

Each case is one mutation of a small, valid project, and every case must end in one of two ways:

- accepted, and then nothing damaged slipped through: every data line of the rig file is either
  a sample whose values equal the cells written on that line, or a row the reader reports as
  rejected (with its line), or a blank or comment line; conditioning and the reference
  conditions then run without an internal error;
- refused with a user error (a documented exit code, no traceback) whose message names where:
  the rig file and the mutated line (or the header), or the manifest key that was mutated (or
  one of its parents, or a key that refers to it).

Anything else (another exception, a hang) is an internal error, counted and reported. The same
checks run in CI with a fixed, derandomized Hypothesis budget (``tests/test_fuzz.py``) and in a
longer local run (``python tests/fuzz_long.py``).
"""

from __future__ import annotations

import copy
import datetime as dt
import tomllib
from dataclasses import dataclass
from pathlib import Path

import numpy as np
import projects as P

from dossier.common.errors import ManifestError, RigDataError, UserError
from dossier.conditioning.drift import estimate_drift
from dossier.conditioning.steady_state import condition_run
from dossier.engine.build import check
from dossier.ingest.rig_table import parse_run
from dossier.project.conditions import nominal_load_n, nominal_pressure_kpa
from dossier.project.load import load_project
from dossier.project.manifest import ConditioningSettings

ACCEPTED, REFUSED, INTERNAL, MISLOCATED, SILENT = "accepted", "refused", "internal error", "mislocated", "silent"

# --- the base project: one tire, three loads, ISO 8855 and SI units (so cells equal samples) ------

HEADER = ["TIME", "SLIP_ANGLE", "FZ", "FY", "MZ"]
LOADS_N = [2000.0, 4000.0, 6000.0]


def _tire(slip_deg, fz_n):
    return -1.0 * fz_n * np.sin(1.4 * np.arctan(0.25 * np.asarray(slip_deg)))


def base_rig_lines(decimal: str = ".", delimiter: str = ",") -> list[str]:
    t, a, fz, fy = P.sweep_samples(
        LOADS_N, _tire, sweep_deg=8.0, rate_deg_s=4.0, settle_s=0.6, ramp_s=0.4, noise_n=5.0, seed=2
    )
    mz = 0.02 * fy
    lines = [delimiter.join(HEADER)]
    for row in zip(t, a, fz, fy, mz, strict=True):
        cells = [f"{v:.6g}" for v in row]
        lines.append(delimiter.join(c.replace(".", decimal) for c in cells))
    return lines


def manifest_text(decimal: str = ".", delimiter: str = ",") -> str:
    columns = {
        "time": ("TIME", "s"),
        "slip_angle": ("SLIP_ANGLE", "deg"),
        "fz": ("FZ", "N"),
        "fy": ("FY", "N"),
        "mz": ("MZ", "N·m"),
    }
    cols = "\n".join(f'{ch} = {{ name = "{name}", unit = "{unit}" }}' for ch, (name, unit) in columns.items())
    run = (
        '\n[[runs]]\nspecimen = "{sid}"\nfile = "rig/{file}"\nlab = "Lab 1"\naxis_convention = "ISO 8855"\n'
        f'delimiter = "{delimiter}"\ndecimal = "{decimal}"\ntested_at = {{at}}\n'
        'load_setpoints = { values = [2, 4, 6], unit = "kN" }\npressure = { value = 250, unit = "kPa" }\n'
        f"[runs.columns]\n{cols}\n"
    )
    runs = "".join(
        run.replace("{sid}", sid).replace("{file}", f).replace("{at}", at)
        for sid, f, at in (
            ("BASE", "a.csv", "2026-11-03T09:00:00"),
            ("CAND", "a.csv", "2026-11-03T10:00:00"),
            ("CTRL", "a.csv", "2026-11-03T08:00:00"),
            ("CTRL", "a.csv", "2026-11-03T11:00:00"),
        )
    )
    return (
        P.MANIFEST_HEAD
        + 'supplier = "Test supplier"\n'
        + P.specimen_block("BASE")
        + P.specimen_block("CAND", role="candidate", size="235/40 R18 95Y")
        + P.specimen_block("CTRL", role="control")
        + runs
        + '\n[narrative]\nsummary = "notes/summary.md"\n'
        + "\n[fit]\nnominal_pressure_kpa = 250\nleave_one_load_out = false\n"
        + "\n[conditioning]\nmin_slip_range_deg = 3.0\n"
        + "\n[metrics]\nloads_n = [5000]\n"
        + '\n[drift]\ncontrol = "CTRL"\ncorrect = true\n'
        + '\n[[targets]]\nmetric = "cornering_stiffness"\nload_n = 4000\nminimum = 100\nreference = "spec 1"\n'
        + '\n[vehicle]\nname = "Test car"\n'
        + 'mass = { value = 1500, unit = "kg" }\ncg_to_front_axle = { value = 1.2, unit = "m" }\n'
        + '[[vehicle.axles]]\nname = "front"\nposition = "steer"\nfrom_front = { value = 0, unit = "m" }\n'
        + '[[vehicle.axles]]\nname = "rear"\nposition = "drive"\nfrom_front = { value = 2.7, unit = "m" }\n'
        + '[[vehicle.fitments]]\nname = "BASE all round"\n'
        + 'mounted = { front = { specimen = "BASE" }, rear = { specimen = "BASE" } }\n'
        + '\n[signoff]\nstatus = "draft"\n[[signoff.people]]\nname = "A. Tester"\nrole = "author"\n'
    )


def write_project(root: Path, rig_lines: list[str] | bytes, manifest: str) -> Path:
    (root / "rig").mkdir(parents=True, exist_ok=True)
    (root / "notes").mkdir(exist_ok=True)
    data = rig_lines if isinstance(rig_lines, bytes) else ("\n".join(rig_lines) + "\n").encode("utf-8")
    (root / "rig/a.csv").write_bytes(data)
    (root / "notes/summary.md").write_text("Summary.\n", encoding="utf-8")
    (root / "dossier.toml").write_text(manifest, encoding="utf-8")
    return root


@dataclass(frozen=True)
class Outcome:
    kind: str  # ACCEPTED, REFUSED, or a failure: INTERNAL, MISLOCATED, SILENT
    detail: str = ""

    @property
    def ok(self) -> bool:
        return self.kind in (ACCEPTED, REFUSED)


# --- rig files ----------------------------------------------------------------------------------

# The mutations that rewrite the cells of one line.
CELL_MUTATIONS = (
    "extra_field",
    "missing_field",
    "text_cell",
    "number_cell",
    "sentinel_cell",
    "empty_row",
    "thousands",
    "decimal_swap",
    "nul",
)
RIG_MUTATIONS = (*CELL_MUTATIONS, "blank_line", "truncate", "byte", "delete_line", "swap_lines", "header_cell")
SENTINELS = ("-9.9e37", "9.9e37", "1e10", "1.79e308", "-1.79e308", "nan", "inf", "-0", "1e-320", "99999")


def mutate_rig(
    lines: list[str],
    kind: str,
    line: int,
    column: int,
    text: str,
    number: float,
    decimal: str = ".",
    delimiter: str = ",",
) -> tuple[bytes, int | None]:
    """Apply one mutation to data line `line` (1-based, header excluded) or cell `column`; return
    the bytes and the 1-based line of the file the mutation is on (None: file-wide)."""
    out = list(lines)
    i = 1 + (line % (len(out) - 1))  # a data line
    cells = out[i].split(delimiter)
    j = column % len(cells)
    where: int | None = i + 1
    if kind == "extra_field":
        cells.insert(j, "7")
    elif kind == "missing_field":
        del cells[j]
    elif kind == "text_cell":
        cells[j] = text
    elif kind == "number_cell":
        cells[j] = repr(number).replace(".", decimal) if decimal == "," else repr(number)
    elif kind == "sentinel_cell":
        cells[j] = SENTINELS[line % len(SENTINELS)]
    elif kind == "empty_row":
        cells = [""] * len(cells)
    elif kind == "thousands":
        cells[j] = "1" + ("." if decimal == "," else ",") + "234" + decimal + "5"
    elif kind == "decimal_swap":
        cells[j] = (
            cells[j].replace(decimal, "," if decimal == "." else ".")
            if decimal in cells[j]
            else cells[j] + (",5" if decimal == "." else ".5")
        )
    elif kind == "nul":
        cells[j] = cells[j][:1] + "\x00" + cells[j][1:]
    elif kind == "header_cell":
        h = out[0].split(delimiter)
        h[j % len(h)] = text
        out[0] = delimiter.join(h)
        where = 1
    if kind in CELL_MUTATIONS:
        out[i] = delimiter.join(cells)
    elif kind == "blank_line":
        out.insert(i, "")
    elif kind == "delete_line":
        del out[i]
        where = None
    elif kind == "swap_lines" and i + 1 < len(out):
        out[i], out[i + 1] = out[i + 1], out[i]
    data = ("\n".join(out) + "\n").encode("utf-8")
    if kind == "truncate":
        cut = (line * 7919 + column) % len(data)
        data, where = data[:cut], data[:cut].count(b"\n") + 1
    elif kind == "byte":
        k = (line * 7919 + column) % len(data)
        data = data[:k] + bytes([number_byte(number)]) + data[k + 1 :]
        where = data[:k].count(b"\n") + 1
    return data, where


def number_byte(number: float) -> int:
    return int(abs(number * 1000)) % 256 if np.isfinite(number) else 0


FILE_LEVEL = (
    "beyond any rig's range (",
    "the file is empty",
    "has no usable data rows",
    "has a header but no data rows",
    "normal load is negative",
    "lateral force rises with slip angle",
    "slip angle spans only",
    "expected a header on line",
    "unusable after conditioning",
)


def check_rig_case(root: Path, data: bytes, where: int | None, decimal: str = ".", delimiter: str = ",") -> Outcome:
    """Parse and condition the mutated rig file; judge the outcome (see the module docstring)."""
    try:
        project = write_project(root, base_rig_lines(decimal, delimiter), manifest_text(decimal, delimiter))
        (root / "rig/a.csv").write_bytes(data)
        project = load_project(root)
        spec = project.manifest.runs[0]
        run = parse_run(project.files[spec.file], spec)
    except RigDataError as exc:
        return _located_in_file(str(exc), where)
    except UserError as exc:
        return Outcome(MISLOCATED, f"not a rig-data error: {exc}")
    except Exception as exc:
        return Outcome(INTERNAL, f"{type(exc).__name__}: {exc}")
    silent = _silently_damaged(data, run, decimal, delimiter)
    if silent:
        return Outcome(SILENT, silent)
    try:
        condition_run(run, ConditioningSettings(min_slip_range_deg=3.0))
    except UserError as exc:
        return _located_in_file(str(exc), where)
    except Exception as exc:
        return Outcome(INTERNAL, f"conditioning: {type(exc).__name__}: {exc}")
    return Outcome(ACCEPTED)


def _located_in_file(message: str, where: int | None) -> Outcome:
    if "rig/a.csv" not in message:
        return Outcome(MISLOCATED, f"does not name the file: {message}")
    if where is None or any(s in message for s in FILE_LEVEL):
        return Outcome(REFUSED, message)
    near = [f"line {n}," for n in (where - 1, where, where + 1)] + [f"line {n}:" for n in (where - 1, where, where + 1)]
    if any(s in message + ":" for s in near) or "line 1:" in message or "line 1," in message:
        return Outcome(REFUSED, message)
    return Outcome(MISLOCATED, f"mutated line {where}: {message}")


def _silently_damaged(data: bytes, run, decimal: str, delimiter: str) -> str:
    """'' if every data line was read as written, rejected with its line, or is blank; else what slipped."""
    text = data.decode("utf-8-sig", errors="replace")
    lines = text.split("\n")
    kept = {int(n): k for k, n in enumerate(run.line_numbers)}
    rejected = {r.line for r in run.rejected}
    header = lines[0].removesuffix("\r").split(delimiter)
    columns = {ch: header.index(c.name) for ch, c in run.spec.columns.items()}
    for n, line in enumerate(lines[1:], start=2):
        body = line.removesuffix("\r")
        if n in kept:
            cells = body.split(delimiter)
            if len(cells) != len(header):
                return f"line {n}: {len(cells)} fields read as a sample of {len(header)}"
            for ch, col in columns.items():
                written = float(cells[col].strip().replace(decimal, ".") if decimal == "," else cells[col])
                if run.channels[ch][kept[n]] != written:
                    return f"line {n}, {ch}: {cells[col]!r} written, {run.channels[ch][kept[n]]!r} read"
        elif n not in rejected and body.strip() and not body.lstrip().startswith("#"):
            return f"line {n} neither read nor reported: {body[:60]!r}"
    return ""


# --- manifests ----------------------------------------------------------------------------------

TARGETED = [
    "",
    ".",
    "..",
    "/etc/passwd",
    "../outside.csv",
    "rig/",
    "a" * 300,
    "x\x00y",
    "metre",
    "klbf",
    "kN",
    2**70,
    -(2**63),
    0,
    -1,
    1.79e308,
    -9.9e37,
    float("nan"),
    float("inf"),
    1e-320,
    True,
    [],
    {},
    [[[]]],
    {"value": 1},
    {"unit": "m"},
    {"value": "2.7", "unit": "m"},
    ["cornering_stiffness"],
    dt.datetime(2026, 11, 3, 9, 0, tzinfo=dt.UTC),
    dt.date(1900, 1, 1),
    "x" * 5000,
    "CND-B belt 27deg + full-width_nylon_cap_ply_NT-S47_compound_lot4126",
    "BASE",
    "B A S E",
    "+++",
]


def key_paths(doc, prefix=()):
    if isinstance(doc, dict):
        for k, v in doc.items():
            yield (*prefix, k)
            yield from key_paths(v, (*prefix, k))
    elif isinstance(doc, list):
        for i, v in enumerate(doc):
            yield (*prefix, i)
            yield from key_paths(v, (*prefix, i))


def shown_path(path) -> str:
    out = ""
    for k in path:
        out += f"[{k}]" if isinstance(k, int) else (f".{k}" if out else str(k))
    return out


BASE_DOC = tomllib.loads(manifest_text())
MANIFEST_PATHS = list(key_paths(BASE_DOC))


def mutate_manifest(operation: str, path: tuple, value) -> dict:
    doc = copy.deepcopy(BASE_DOC)
    node = doc
    for key in path[:-1]:
        node = node[key]
    if operation == "set":
        node[path[-1]] = value
    elif operation == "delete":
        del node[path[-1]]
    elif operation == "add" and isinstance(node[path[-1]], dict):
        node[path[-1]]["unexpected_key"] = value
    elif operation == "nest":
        deep = value
        for _ in range(300):
            deep = [deep]
        node[path[-1]] = deep
    return doc


# Keys whose values other keys refer to: a problem may be reported where the reference is.
REFERRED = {
    "specimens": ("runs", "drift.control", "targets", "specimens"),
    "runs": ("specimens", "drift"),
    "drift": ("runs",),
    "document.revision": ("revisions",),
    "signoff": ("signoff",),
    "vehicle": ("vehicle",),
    "targets": ("targets",),
}


def check_manifest_case(root: Path, operation: str, path: tuple, value) -> Outcome:
    """Load (and condition) the project with a mutated manifest; judge the outcome."""
    import tomli_w

    doc = mutate_manifest(operation, path, value)
    try:
        text = tomli_w.dumps(doc)
    except (TypeError, ValueError, RecursionError):
        return Outcome(ACCEPTED, "not writable as TOML")  # no such manifest can exist
    write_project(root, base_rig_lines(), text)
    mutated = shown_path(path)
    try:
        project = load_project(root)
        conditioned = check(project, _conditioning_cache(root))
        measured = [p for c in conditioned for p in c.points]
        fz0 = nominal_load_n(project.manifest)
        nominal_pressure_kpa(project.manifest)
        if project.manifest.drift:
            estimate_drift(measured, project.manifest.drift.control, fz0)
    except ManifestError as exc:
        locations = [p.location for p in exc.problems]
        if _names(locations, mutated, str(exc)):
            return Outcome(REFUSED, str(exc))
        return Outcome(MISLOCATED, f"mutated {mutated!r} ({operation}); reported {locations}")
    except UserError as exc:
        if _names([], mutated, str(exc)) or "rig/a.csv" in str(exc):
            return Outcome(REFUSED, str(exc))
        return Outcome(MISLOCATED, f"mutated {mutated!r} ({operation}); message: {exc}")
    except Exception as exc:
        return Outcome(INTERNAL, f"mutated {mutated!r} ({operation} {value!r:.60}): {type(exc).__name__}: {exc}")
    return Outcome(ACCEPTED)


def _conditioning_cache(root: Path):
    """A conditioning cache shared by the cases under one folder: most mutations leave the runs as
    they are, and a cached run is keyed by everything it was made from."""
    from dossier.engine.cache import Cache

    return Cache(root.parent / "conditioning-cache")


def _names(locations: list[str], mutated: str, message: str) -> bool:
    """Whether a problem is reported at the mutated key, one of its parents or children, or a key
    that refers to it."""
    parts = [mutated]
    while "." in parts[-1] or "[" in parts[-1]:
        cut = max(parts[-1].rfind("."), parts[-1].rfind("["))
        parts.append(parts[-1][:cut])
    related = [r for key, refs in REFERRED.items() if mutated.startswith(key) for r in refs]
    for loc in locations or [message]:
        if any(loc.startswith(p) or p.startswith(loc) for p in parts if p) or any(r in loc for r in related):
            return True
        if loc in ("TOML syntax", "file", "project"):
            return True
    return any(p in message for p in parts if p)


def check_build_case(root: Path, operation: str, path: tuple, value) -> Outcome:
    """As :func:`check_manifest_case`, then the whole dossier assembled in memory (every stage,
    figures and PDFs included) when the mutated manifest loads."""
    first = check_manifest_case(root, operation, path, value)
    if first.kind != ACCEPTED or first.detail:
        return first
    from dossier.document.theme import load_theme
    from dossier.engine.build import assemble

    try:
        assemble(load_project(root), load_theme("default"))
    except UserError as exc:
        return Outcome(REFUSED, str(exc))
    except Exception as exc:
        return Outcome(
            INTERNAL, f"build, mutated {shown_path(path)!r} ({operation} {value!r:.60}): {type(exc).__name__}: {exc}"
        )
    return Outcome(ACCEPTED)
