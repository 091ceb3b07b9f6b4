"""The archive edge: read a built dossier back, verify it, seal it, compare two of them, rebuild one.

Reading and the one write (the seal file, and key files for `keygen`) happen here; the checks
themselves are the pure functions of :mod:`dossier.integrity`.
"""

from __future__ import annotations

import json
import os
import tempfile
from dataclasses import dataclass
from pathlib import Path

from . import integrity
from .errors import UserError

INPUTS = "inputs"  # the archived project inside an output folder


class VerifyError(UserError):
    exit_code = 5


def read_folder(folder: Path) -> dict[str, bytes]:
    """Every regular file under `folder` (relative POSIX path → bytes), the marker excluded."""
    folder = Path(folder)
    if not folder.is_dir():
        raise UserError(f"{folder}: not a folder")
    out = {}
    for p in sorted(folder.rglob("*")):
        if p.is_file() and not p.is_symlink() and p.name not in (".dossier-output", ".dossier-build-key"):
            out[p.relative_to(folder).as_posix()] = p.read_bytes()
    return out


def verify(folder: Path, public_key: Path | None = None) -> integrity.Report:
    pem = Path(public_key).read_bytes() if public_key else None
    return integrity.check(read_folder(folder), pem)


def seal(folder: Path, private_key: Path) -> str:
    """Sign the folder's integrity manifest; only a released, intact, unsealed revision is sealed."""
    folder = Path(folder)
    files = read_folder(folder)
    report = integrity.check(files)
    if not report.ok:
        raise VerifyError(f"{folder}: will not seal a dossier that fails verification:\n  " + "\n  ".join(report.lines()))
    if integrity.SEAL in files:
        raise VerifyError(f"{folder}: already sealed; a released revision is frozen")
    results = json.loads(files.get("results.json", b"{}"))
    status = results.get("document", {}).get("status")
    if status != "released":
        raise VerifyError(f"{folder}: status is {status!r}; only a released revision is sealed "
                          "(set [signoff] status = \"released\" with a dated approver and rebuild)")
    doc = results["document"]
    try:
        data = integrity.seal_bytes(files[integrity.MANIFEST], Path(private_key).read_bytes(), doc["number"],
                                    doc["revision"])
    except (OSError, ValueError) as exc:
        raise UserError(f"{private_key}: cannot sign with this key ({exc})") from None
    target = folder / integrity.SEAL
    fd, tmp = tempfile.mkstemp(dir=folder, prefix=".seal-")
    with os.fdopen(fd, "wb") as fh:
        fh.write(data)
    os.replace(tmp, target)
    return json.loads(data)["key_id"]


def keygen(private_path: Path, public_path: Path) -> None:
    """Write a new Ed25519 key pair; refuses to overwrite any file."""
    for p in (private_path, public_path):
        if Path(p).exists():
            raise UserError(f"{p}: exists; will not overwrite a key file")
    private, public = integrity.new_key_pair()
    fd = os.open(private_path, os.O_WRONLY | os.O_CREAT | os.O_EXCL, 0o600)
    with os.fdopen(fd, "wb") as fh:
        fh.write(private)
    Path(public_path).write_bytes(public)


@dataclass(frozen=True)
class Change:
    kind: str  # "coefficient", "metric", "verdict", "input"
    key: str
    old: str
    new: str


def diff(old: Path, new: Path) -> list[Change]:
    """What changed between two built dossiers: inputs, coefficients, metrics and verdicts."""
    a = json.loads((Path(old) / "results.json").read_bytes())
    b = json.loads((Path(new) / "results.json").read_bytes())

    def index(results):
        out = {}
        for i in results.get("inputs", []):
            out[("input", i["file"])] = i["sha256"][:16]
        for f in results.get("fits", []):
            for c in f["coefficients"]:
                out[("coefficient", f"{f['specimen']} {f['channel']} {c['name']}")] = f"{c['value']:.6g} ({c['status']})"
        for m in results.get("metrics", []):
            out[("metric", f"{m['specimen']} {m['metric']} at {m['load_n']:.0f} N")] = f"{m['value']:.6g} {m['unit']}"
        for v in results.get("verdicts", []):
            out[("verdict", f"{v['specimen']} {v['metric']} (target {v['target']})")] = v["verdict"]
        return out

    ia, ib = index(a), index(b)
    changes = []
    for key in sorted(set(ia) | set(ib)):
        if ia.get(key) != ib.get(key):
            changes.append(Change(key[0], key[1], ia.get(key, "(absent)"), ib.get(key, "(absent)")))
    return changes


def rebuild_and_compare(folder: Path, theme: str = "default") -> list[str]:
    """Rebuild from the archived inputs and return the result files that differ (empty: reproduced)."""
    from .build import build

    folder = Path(folder)
    inputs = folder / INPUTS
    if not (inputs / "dossier.toml").is_file():
        raise VerifyError(f"{folder}: no archived inputs ({INPUTS}/dossier.toml); cannot rebuild")
    with tempfile.TemporaryDirectory() as tmp:
        out = Path(tmp) / "rebuilt"
        build(inputs, out, theme, use_cache=False)  # never write a cache into the archive
        old, new = read_folder(folder), read_folder(out)
    skip = set(integrity.TAG_FILES)
    names = sorted((set(old) | set(new)) - skip)
    return [n for n in names if old.get(n) != new.get(n)]
