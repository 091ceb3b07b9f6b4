"""The archive edge: read a built dossier back, verify it, sign it, export it, compare two of
them (rebuilding one is the engine's: :mod:`dossier.engine.rebuild`).

Reading and the few writes (signature files, key files, an exported bag) happen here; the checks
themselves are the pure functions of :mod:`dossier.publish.integrity`.
"""

from __future__ import annotations

import datetime as dt
import json
import os
import shutil
import tempfile
import zipfile
from dataclasses import dataclass, replace
from pathlib import Path

from .. import __version__
from ..common.errors import StateError, UserError, VerifyError
from ..publish import integrity
from .layout import ATTACHED_MANIFEST, BOOKKEEPING, RESULTS_NAME

__all__ = ["read_folder", "verify", "seal", "countersign", "keygen", "export", "diff", "verify_report_pdf"]


def read_folder(folder: Path) -> dict[str, bytes]:
    """Every regular file under `folder` (relative POSIX path → bytes), our bookkeeping excluded."""
    folder = Path(folder)
    if not folder.exists():
        raise UserError(f"{folder}: no such folder")
    if not folder.is_dir():
        raise UserError(f"{folder}: not a folder (expected a dossier output folder)")
    out = {}
    for p in sorted(folder.rglob("*")):
        if p.is_file() and not p.is_symlink() and p.name not in BOOKKEEPING:
            try:
                out[p.relative_to(folder).as_posix()] = p.read_bytes()
            except OSError as exc:
                raise UserError(f"{p}: cannot be read ({exc.strerror or exc})") from None
    return out


def _identity(files: dict[str, bytes], where: Path) -> dict:
    """The document block of results.json; a clear error if this is not a dossier output."""
    if RESULTS_NAME not in files:
        raise UserError(
            f"{where}: not a dossier output folder (no {RESULTS_NAME}); expected the folder `dossier build` wrote"
        )
    try:
        doc = json.loads(files[RESULTS_NAME])["document"]
        return {
            "number": str(doc["number"]),
            "revision": str(doc["revision"]),
            "status": str(doc["status"]),
            "supplier": str(doc.get("supplier") or ""),
            "authors": list(doc.get("authors") or []),
            "date": str(doc.get("date", "")),
        }
    except (ValueError, KeyError, TypeError) as exc:
        raise VerifyError(f"{where}/{RESULTS_NAME}: cannot be read as a dossier's results ({exc})") from None


def _trusted_keys(public_keys) -> dict[str, bytes]:
    out = {}
    for p in public_keys or ():
        try:
            out[Path(p).name] = integrity.public_key_raw(Path(p).read_bytes())
        except OSError as exc:
            raise UserError(f"{p}: cannot read the public key ({exc.strerror or exc})") from None
        except ValueError as exc:
            raise UserError(f"{p}: expected an Ed25519 public key in PEM form; {exc}") from None
    return out


def verify(folder: Path, public_keys=()) -> integrity.Report:
    """Check every file of a dossier folder against its manifest, and every signature; symbolic
    links and anything else that is not a regular file are reported (a dossier holds none)."""
    files = read_folder(folder)
    trusted = _trusted_keys(public_keys)
    if integrity.MANIFEST not in files:
        report = integrity.check(files, None, None)
    else:
        try:
            ident = _identity(files, Path(folder))
            report = integrity.check(files, ident["number"], ident["revision"], trusted)
        except VerifyError as exc:  # an altered results.json is reported with everything else
            report = integrity.check(files, None, None, trusted)
            report = replace(report, problems=report.problems + (str(exc),))
    odd = tuple(f"not a regular file (a dossier holds none): {name}" for name in _not_regular(Path(folder)))
    return replace(report, problems=report.problems + odd) if odd else report


def _not_regular(folder: Path) -> list[str]:
    """Symbolic links, sockets, pipes and devices under `folder` (links are not followed)."""
    out = []
    for p in sorted(folder.rglob("*")):
        if p.is_symlink():
            out.append(f"{p.relative_to(folder).as_posix()} (symbolic link to {os.readlink(p)})")
        elif not p.is_file() and not p.is_dir():
            out.append(p.relative_to(folder).as_posix())
    return out


def digest(folder: Path) -> tuple[str, dict]:
    """The dossier's digest (SHA-256 of its manifest) and identity, after checking its files."""
    files = read_folder(folder)
    report = integrity.check(files, *ids(files, folder))
    if not report.files_ok:
        raise VerifyError(f"{folder}: the files do not match the integrity manifest:\n  " + "\n  ".join(report.lines()))
    return report.digest, _identity(files, Path(folder))


def ids(files, folder) -> tuple[str, str]:
    if integrity.MANIFEST not in files:
        raise UserError(f"{folder}: not a dossier output folder (no {integrity.MANIFEST})")
    ident = _identity(files, Path(folder))
    return ident["number"], ident["revision"]


def _now() -> str:
    return dt.datetime.now(dt.UTC).replace(microsecond=0).isoformat()


def _write_new(target: Path, data: bytes) -> None:
    """Write a new file atomically; never replace an existing one."""
    target.parent.mkdir(parents=True, exist_ok=True)
    fd, tmp = tempfile.mkstemp(dir=target.parent, prefix=".signature-")
    try:
        with os.fdopen(fd, "wb") as fh:
            fh.write(data)
        os.link(tmp, target)  # fails if the target exists: a signature is never overwritten
    except FileExistsError:
        raise StateError(f"{target}: exists; a signature is never overwritten") from None
    finally:
        os.unlink(tmp)


def _private_key(path: Path) -> bytes:
    try:
        return Path(path).read_bytes()
    except OSError as exc:
        raise UserError(f"{path}: cannot read the private key ({exc.strerror or exc})") from None


def _intact(folder: Path, action: str) -> tuple[dict[str, bytes], str, str, integrity.Report]:
    """Read a dossier folder and check it; refuse `action` on one that fails verification."""
    files = read_folder(folder)
    number, revision = ids(files, folder)
    report = integrity.check(files, number, revision)
    if report.state == integrity.FAILED:
        raise VerifyError(
            f"{folder}: will not {action} a dossier that fails verification:\n  " + "\n  ".join(report.lines())
        )
    return files, number, revision, report


def seal(folder: Path, private_key: Path, signer: str | None = None, organisation: str | None = None) -> str:
    """The supplier's seal of a released, intact, unsealed revision; returns the key id."""
    folder = Path(folder)
    files, number, revision, report = _intact(folder, "seal")
    if integrity.SUPPLIER_SEAL in files:
        raise StateError(f"{folder}: already sealed ({integrity.SUPPLIER_SEAL}); a released revision is frozen")
    ident = _identity(files, folder)
    if ident["status"] != "released":
        raise StateError(
            f"{folder}: status is {ident['status']!r}; only a released revision is sealed "
            '(set [signoff] status = "released" with a dated approver and rebuild)'
        )
    try:
        data = integrity.sign_statement(
            _private_key(private_key),
            role=integrity.SUPPLIER,
            statement="released",
            reason="",
            signer=signer or (ident["authors"][0] if ident["authors"] else ""),
            organisation=organisation if organisation is not None else ident["supplier"],
            document=number,
            revision=revision,
            digest=report.digest,
            signed_at=_now(),
        )
    except ValueError as exc:
        raise UserError(f"{private_key}: cannot sign with this key ({exc})") from None
    _write_new(folder / integrity.SUPPLIER_SEAL, data)
    return json.loads(data)["key_id"]


def countersign(
    private_key: Path,
    statement: str,
    reason: str,
    signer: str,
    organisation: str = "",
    *,
    folder: Path | None = None,
    digest_hex: str | None = None,
    document: str | None = None,
    revision: str | None = None,
    out: Path | None = None,
) -> Path:
    """The customer approver's signature of the same digest the supplier sealed.

    Given the dossier `folder`, the signature is checked against it and written into its
    ``signatures/``; given only the `digest_hex` (with `document` and `revision`), it is written
    to `out`, to be put into the dossier's ``signatures/`` folder. The key is only read here.
    """
    if statement not in integrity.APPROVER_STATEMENTS:
        raise UserError(f"--statement: expected one of {', '.join(integrity.APPROVER_STATEMENTS)}; found {statement!r}")
    if statement != "approved" and not reason.strip():
        raise UserError(f"--reason: a statement '{statement}' needs a reason")
    if not signer.strip():
        raise UserError("--signer: the approver's name is needed")
    if folder is not None:
        folder = Path(folder)
        files, number, revision, report = _intact(folder, "countersign")
        if not any(s.role == integrity.SUPPLIER for s in report.signatures):
            raise StateError(f"{folder}: not sealed by the supplier; only a sealed, released revision is countersigned")
        digest_hex, document = report.digest, number
    elif not (digest_hex and document and revision):
        raise UserError("countersign: give the dossier folder, or --digest with --document and --revision")
    if len(digest_hex) != 64 or any(c not in "0123456789abcdef" for c in digest_hex):
        raise UserError(
            f"--digest: expected 64 lower-case hexadecimal digits (the SHA-256 `dossier digest` prints); "
            f"found {digest_hex[:70]!r}"
        )
    try:
        data = integrity.sign_statement(
            _private_key(private_key),
            role=integrity.APPROVER,
            statement=statement,
            reason=reason.strip(),
            signer=signer.strip(),
            organisation=organisation,
            document=document,
            revision=revision,
            digest=digest_hex,
            signed_at=_now(),
        )
    except ValueError as exc:
        raise UserError(f"{private_key}: cannot sign with this key ({exc})") from None
    key = json.loads(data)["key_id"]
    if out:
        target = Path(out)
    else:
        assert folder is not None  # with only a digest the caller names `out` (the command line insists)
        target = Path(folder) / integrity.SIGNATURES / f"approver-{key}.json"
    _write_new(target, data)
    return target


def keygen(private_path: Path, public_path: Path) -> None:
    """Write a new Ed25519 key pair; refuses to overwrite any file."""
    for p in (private_path, public_path):
        if Path(p).exists():
            raise UserError(f"{p}: exists; will not overwrite a key file")
        if not Path(p).parent.is_dir():
            raise UserError(f"{p}: the folder {Path(p).parent} does not exist")
    private, public = integrity.new_key_pair()
    try:
        fd = os.open(private_path, os.O_WRONLY | os.O_CREAT | os.O_EXCL, 0o600)
    except OSError as exc:
        raise UserError(f"{private_path}: cannot be created ({exc.strerror}); nothing was written") from None
    with os.fdopen(fd, "wb") as fh:
        fh.write(private)
    try:
        Path(public_path).write_bytes(public)
    except OSError as exc:
        Path(private_path).unlink()  # ours, made a moment ago: no half of a pair is left behind
        raise UserError(f"{public_path}: cannot be written ({exc.strerror}); no key was kept") from None


def export(folder: Path, target: Path, as_zip: bool = False) -> Path:
    """Write a BagIt bag (RFC 8493) of an intact dossier: a new folder, or a zip with the bag as
    its one top folder. Nothing existing is overwritten."""
    folder, target = Path(folder), Path(target)
    files, number, revision, report = _intact(folder, "export")
    if target.exists():
        raise UserError(f"{target}: exists; choose a new name (nothing was changed)")
    ident = _identity(files, folder)
    bag = integrity.bag_files(
        files,
        external_identifier=f"{number} rev. {revision}",
        source_organization=ident["supplier"],
        bagging_date=dt.date.today().isoformat(),
        software=f"dossier {__version__}",
    )
    if not target.parent.is_dir():
        raise UserError(f"{target}: the folder {target.parent} does not exist (nothing was changed)")
    try:
        tmp = Path(tempfile.mkdtemp(prefix=f".{target.name}.export-", dir=target.parent))
    except OSError as exc:
        raise UserError(f"{target}: cannot write in {target.parent} ({exc.strerror}); nothing was changed") from None
    try:
        if as_zip:
            top = target.stem
            with zipfile.ZipFile(tmp / "bag.zip", "w", zipfile.ZIP_DEFLATED) as z:
                for name, data in sorted(bag.items()):
                    info = zipfile.ZipInfo(f"{top}/{name}", date_time=(1980, 1, 1, 0, 0, 0))
                    info.compress_type = zipfile.ZIP_DEFLATED
                    z.writestr(info, data)
            os.replace(tmp / "bag.zip", target)
        else:
            for name, data in bag.items():
                (tmp / "bag" / name).parent.mkdir(parents=True, exist_ok=True)
                (tmp / "bag" / name).write_bytes(data)
            os.replace(tmp / "bag", target)
    finally:
        shutil.rmtree(tmp, ignore_errors=True)
    return target


@dataclass(frozen=True)
class Change:
    kind: str  # "coefficient", "metric", "verdict", "input"
    key: str
    old: str
    new: str


def diff(old: Path, new: Path) -> list[Change]:
    """What changed between two built dossiers: inputs, coefficients, metrics and verdicts."""

    def results(folder: Path) -> dict:
        path = Path(folder) / RESULTS_NAME
        if not Path(folder).is_dir():
            raise UserError(f"{folder}: no such folder (expected a dossier output folder)")
        try:
            return json.loads(path.read_bytes())
        except FileNotFoundError:
            raise UserError(f"{folder}: not a dossier output folder (no {RESULTS_NAME})") from None
        except (OSError, ValueError) as exc:
            raise UserError(f"{path}: cannot be read as a dossier's results ({exc})") from None

    a, b = results(old), results(new)

    def index(results):
        out = {}
        for i in results.get("inputs", []):
            out[("input", i["file"])] = i["sha256"][:16]
        for f in results.get("fits", []):
            for c in f["coefficients"]:
                out[("coefficient", f"{f['specimen']} {f['channel']} {c['name']}")] = (
                    f"{c['value']:.6g} ({c['status']})"
                )
        for m in results.get("metrics", []):
            where = (
                ""
                if m.get("nominal_condition", True)
                else f", camber {m['camber_deg']:g}°, {m['pressure_kpa']:.0f} kPa"
            )
            out[("metric", f"{m['specimen']} {m['metric']} at {m['load_n']:.0f} N{where}")] = (
                f"{m['value']:.6g} {m['unit']}"
            )
        for v in results.get("verdicts", []):
            out[("verdict", f"{v['specimen']} {v['metric']} (target {v['target']})")] = v["verdict"]
        return out

    try:
        ia, ib = index(a), index(b)
    except (KeyError, TypeError, AttributeError) as exc:
        raise UserError(f"{RESULTS_NAME}: not in the layout this version reads ({exc})") from None
    changes = []
    for key in sorted(set(ia) | set(ib)):
        if ia.get(key) != ib.get(key):
            changes.append(Change(key[0], key[1], ia.get(key, "(absent)"), ib.get(key, "(absent)")))
    return changes


# --- the report PDF on its own ------------------------------------------------------------------


def read_pdf(path: Path) -> tuple[bytes, dict[str, bytes]]:
    from ..document.pdfa import attachments

    path = Path(path)
    try:
        data = path.read_bytes()
    except OSError as exc:
        raise UserError(f"{path}: cannot be read ({exc.strerror or exc})") from None
    try:
        return data, attachments(data)
    except Exception as exc:
        raise VerifyError(f"{path}: cannot be read as a PDF ({type(exc).__name__}: {exc})") from None


@dataclass(frozen=True)
class PdfReport:
    """What the report PDF's own attachments say about themselves."""

    attached: int
    missing: tuple[str, ...]  # listed in the attached manifest, not attached (the site aside)
    added: tuple[str, ...]
    altered: tuple[str, ...]
    not_carried: int  # site files: listed, not meant to be in the PDF
    problems: tuple[str, ...] = ()

    @property
    def ok(self) -> bool:
        return not (self.missing or self.added or self.altered or self.problems)

    def lines(self) -> list[str]:
        out = [f"missing from the PDF: {p}" for p in self.missing] + [f"added: {p}" for p in self.added]
        out += [f"altered: {p}" for p in self.altered] + list(self.problems)
        out.append(
            f"{self.attached} attached file(s) checked against the attached {ATTACHED_MANIFEST}; "
            f"{self.not_carried} site file(s) are listed there but carried only by the output folder; "
            "the PDF itself is covered by the folder's manifest and its seal, not by its own attachments"
        )
        return out


def verify_report_pdf(path: Path) -> PdfReport:
    """Check every file the report PDF carries against the integrity manifest it carries."""
    _, attached = read_pdf(path)
    if ATTACHED_MANIFEST not in attached:
        return PdfReport(
            len(attached),
            (),
            (),
            (),
            0,
            (f"{path}: carries no {ATTACHED_MANIFEST}; not a dossier report, or made by an older version",),
        )
    listed, problems = integrity.parse_manifest(attached[ATTACHED_MANIFEST], ATTACHED_MANIFEST)
    carried = {n: d for n, d in attached.items() if n != ATTACHED_MANIFEST}
    expected = {n for n in listed if not n.startswith("site/")}
    return PdfReport(
        len(carried),
        tuple(sorted(expected - set(carried))),
        tuple(sorted(set(carried) - set(listed))),
        tuple(sorted(n for n in set(carried) & set(listed) if integrity.sha256(carried[n]) != listed[n])),
        len(set(listed) - expected),
        tuple(problems),
    )
