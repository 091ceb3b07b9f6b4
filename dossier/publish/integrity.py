"""Integrity of a built dossier: the SHA-256 of every file, and the signatures of the people who
vouch for it. All functions here are pure: they take and return bytes.

Layout (our own, documented in the README):

* ``manifest-sha256.txt`` lists ``<sha256>  <path>`` for every file of the dossier except itself
  and the ``signatures/`` folder (the format of ``sha256sum``, so ``sha256sum -c`` reads it).
  Its SHA-256 is **the dossier's digest**: it stands for every byte of the dossier.
* ``signatures/*.json`` are signed statements about that digest, one file each: the supplier's
  seal of a released revision (``signatures/supplier-seal.json``) and the countersignatures of
  the customer's approvers (``signatures/approver-<key id>.json``). Each is a JSON object whose
  fields (format, role, statement, reason, signer, organisation, document, revision, digest,
  signed_at, public_key, key_id) are signed together with Ed25519 (RFC 8032) over their
  canonical JSON form (keys sorted, no spaces, UTF-8); the signature is the one unsigned field.
  Editing any field, the manifest or any listed file breaks verification.

The output folder is not a BagIt bag (its payload stays at the top so that the site opens as
built); ``dossier export`` writes a real one (RFC 8493) of a built dossier.
"""

from __future__ import annotations

import base64
import hashlib
import json
from dataclasses import dataclass, replace

from .layout import MANIFEST, SIGNATURES, SUPPLIER_SEAL

FORMAT = "dossier-signature/1"
SUPPLIER, APPROVER = "supplier", "approver"
APPROVER_STATEMENTS = ("approved", "approved with deviation", "rejected")
SIGNED_FIELDS = (
    "format",
    "role",
    "statement",
    "reason",
    "signer",
    "organisation",
    "document",
    "revision",
    "digest",
    "signed_at",
    "public_key",
    "key_id",
)


def is_listed(name: str) -> bool:
    """Whether a file of the dossier is listed in its manifest (all but the manifest and signatures)."""
    return name != MANIFEST and not name.startswith(SIGNATURES + "/")


def sha256(data: bytes) -> str:
    return hashlib.sha256(data).hexdigest()


def manifest_bytes(files: dict[str, bytes]) -> bytes:
    """The integrity manifest of `files` (relative path -> bytes), sorted by path."""
    lines = [f"{sha256(data)}  {name}" for name, data in sorted(files.items()) if is_listed(name)]
    return ("\n".join(lines) + "\n").encode("utf-8")


def with_manifest(files: dict[str, bytes]) -> dict[str, bytes]:
    return {**files, MANIFEST: manifest_bytes(files)}


def parse_manifest(data: bytes, where: str = MANIFEST) -> tuple[dict[str, str], list[str]]:
    """Path -> SHA-256 from a manifest's bytes, and the problems with its lines."""
    listed: dict[str, str] = {}
    problems = []
    for i, line in enumerate(data.decode("utf-8", "replace").splitlines(), 1):
        if not line.strip():
            continue
        digest, _, name = line.partition("  ")
        if len(digest) != 64 or not name or any(c not in "0123456789abcdef" for c in digest):
            problems.append(f"{where}, line {i}: expected '<sha256>  <path>'; found {line[:60]!r}")
            continue
        listed[name] = digest
    return listed, problems


# --- signatures ------------------------------------------------------------------------------


@dataclass(frozen=True)
class Signature:
    """One signed statement about a dossier's digest, as read back and checked."""

    file: str
    role: str
    statement: str
    reason: str
    signer: str
    organisation: str
    document: str
    revision: str
    digest: str
    signed_at: str
    key_id: str
    public_key: bytes  # raw Ed25519 public key
    problem: str = ""  # empty: the signature is mathematically valid and about this dossier
    trusted_as: str = ""  # the public-key file it was checked against, if one was given and matched

    def line(self) -> str:
        who = f"{self.signer}" + (f" ({self.organisation})" if self.organisation else "")
        what = self.statement + (f": {self.reason}" if self.reason else "")
        head = f"signature {self.file}: {self.role} {who}, key {self.key_id}, states '{what}', signed {self.signed_at}"
        if self.problem:
            return f"{head}: INVALID: {self.problem}"
        if self.trusted_as:
            return f"{head}: valid, key checked against {self.trusted_as}"
        return f"{head}: signature consistent, but its key was NOT checked (no matching --public-key)"


def canonical(fields: dict) -> bytes:
    """The bytes that are signed: the signed fields as canonical JSON."""
    return json.dumps(
        {k: fields[k] for k in SIGNED_FIELDS}, sort_keys=True, separators=(",", ":"), ensure_ascii=False
    ).encode("utf-8")


def key_id(public_raw: bytes) -> str:
    return sha256(public_raw)[:16]


def sign_statement(
    private_key_pem: bytes,
    *,
    role: str,
    statement: str,
    reason: str,
    signer: str,
    organisation: str,
    document: str,
    revision: str,
    digest: str,
    signed_at: str,
) -> bytes:
    """Return a signature file: the statement about `digest`, signed with the Ed25519 private key."""
    from cryptography.hazmat.primitives import serialization
    from cryptography.hazmat.primitives.asymmetric.ed25519 import Ed25519PrivateKey

    key = serialization.load_pem_private_key(private_key_pem, password=None)
    if not isinstance(key, Ed25519PrivateKey):
        raise ValueError("the private key is not an Ed25519 key")
    pub = key.public_key().public_bytes(serialization.Encoding.Raw, serialization.PublicFormat.Raw)
    fields = {
        "format": FORMAT,
        "role": role,
        "statement": statement,
        "reason": reason,
        "signer": signer,
        "organisation": organisation,
        "document": document,
        "revision": revision,
        "digest": digest,
        "signed_at": signed_at,
        "public_key": base64.b64encode(pub).decode(),
        "key_id": key_id(pub),
    }
    fields["signature"] = base64.b64encode(key.sign(canonical(fields))).decode()
    return (json.dumps(fields, indent=2, ensure_ascii=False) + "\n").encode("utf-8")


def read_signature(
    name: str, data: bytes, digest: str, document: str | None, revision: str | None, trusted: dict[str, bytes]
) -> Signature:
    """Check one signature file against the dossier's digest and identity (None: unknown, not
    compared) and the trusted keys (`trusted`: label -> raw public key)."""
    from cryptography.exceptions import InvalidSignature
    from cryptography.hazmat.primitives.asymmetric.ed25519 import Ed25519PublicKey

    try:
        fields = json.loads(data)
        if not isinstance(fields, dict):
            raise ValueError("not a JSON object")
        missing = [k for k in (*SIGNED_FIELDS, "signature") if not isinstance(fields.get(k), str)]
        if missing:
            raise ValueError(f"missing or not text: {', '.join(missing)}")
        public = base64.b64decode(fields["public_key"], validate=True)
        signature = base64.b64decode(fields["signature"], validate=True)
        key = Ed25519PublicKey.from_public_bytes(public)
    except (ValueError, TypeError) as exc:
        return Signature(
            name, "?", "?", "", "?", "", "", "", "", "", "?", b"", problem=f"cannot be read as a signature file ({exc})"
        )
    sig = Signature(
        name,
        fields["role"],
        fields["statement"],
        fields["reason"],
        fields["signer"],
        fields["organisation"],
        fields["document"],
        fields["revision"],
        fields["digest"],
        fields["signed_at"],
        fields["key_id"],
        public,
    )
    problem = ""
    try:
        key.verify(signature, canonical(fields))
    except InvalidSignature:
        problem = "the signature does not match its fields (a field was edited, or it was not made with this key)"
    if not problem and fields["format"] != FORMAT:
        problem = f"unknown format {fields['format']!r}; expected {FORMAT!r}"
    if not problem and fields["key_id"] != key_id(public):
        problem = "its key id does not belong to its public key"
    if not problem and fields["digest"] != digest:
        problem = f"it signs digest {fields['digest'][:16]}…, but this dossier's digest is {digest[:16]}…"
    if not problem and document is not None and (fields["document"], fields["revision"]) != (document, revision):
        problem = (
            f"it names {fields['document']} rev. {fields['revision']}, but this dossier is {document} rev. {revision}"
        )
    if not problem and fields["role"] == SUPPLIER and name != SUPPLIER_SEAL:
        problem = f"a supplier seal must be {SUPPLIER_SEAL}"
    if not problem and fields["role"] == APPROVER and fields["statement"] not in APPROVER_STATEMENTS:
        problem = f"an approver states one of {', '.join(APPROVER_STATEMENTS)}; found {fields['statement']!r}"
    if not problem and fields["role"] not in (SUPPLIER, APPROVER):
        problem = f"unknown role {fields['role']!r}; expected {SUPPLIER} or {APPROVER}"
    trusted_as = next((label for label, raw in sorted(trusted.items()) if raw == public), "")
    return replace(sig, problem=problem, trusted_as="" if problem else trusted_as)


def public_key_raw(public_key_pem: bytes) -> bytes:
    """The raw Ed25519 public key of a PEM file; ValueError if it is not one."""
    from cryptography.hazmat.primitives import serialization
    from cryptography.hazmat.primitives.asymmetric.ed25519 import Ed25519PublicKey

    key = serialization.load_pem_public_key(public_key_pem)
    if not isinstance(key, Ed25519PublicKey):
        raise ValueError("not an Ed25519 public key")
    return key.public_bytes(serialization.Encoding.Raw, serialization.PublicFormat.Raw)


# --- verification ----------------------------------------------------------------------------

INTACT, UNSIGNED, UNCHECKED, FAILED = "intact", "intact, not sealed", "intact, signers not checked", "failed"


@dataclass(frozen=True)
class Report:
    """What verification found. `state` is FAILED if anything is missing, added or altered or a
    signature fails; UNCHECKED if a signature's key was not among the trusted keys given."""

    digest: str
    missing: tuple[str, ...]
    added: tuple[str, ...]
    altered: tuple[str, ...]
    signatures: tuple[Signature, ...]
    problems: tuple[str, ...] = ()

    @property
    def files_ok(self) -> bool:
        return not (self.missing or self.added or self.altered or self.problems)

    @property
    def state(self) -> str:
        if not self.files_ok or any(s.problem for s in self.signatures):
            return FAILED
        if not self.signatures:
            return UNSIGNED
        if any(not s.trusted_as for s in self.signatures):
            return UNCHECKED
        return INTACT

    @property
    def ok(self) -> bool:
        """Everything matches and every signature was checked against a trusted key (or none exist)."""
        return self.state in (INTACT, UNSIGNED)

    @property
    def approval(self) -> str:
        """The customer's approval as the signatures state it."""
        approvers = [s for s in self.signatures if s.role == APPROVER and not s.problem]
        if not approvers:
            return "customer approval: not signed"
        return "; ".join(
            f"customer approval: {s.statement} by {s.signer}" + (f" ({s.reason})" if s.reason else "")
            for s in approvers
        )

    def lines(self) -> list[str]:
        out = [f"missing: {p}" for p in self.missing] + [f"added: {p}" for p in self.added]
        out += [f"altered: {p}" for p in self.altered] + list(self.problems)
        out.append(f"digest: {self.digest} (SHA-256 of {MANIFEST})")
        out += [s.line() for s in self.signatures]
        if not self.signatures:
            out.append(
                "not sealed: the files match their own manifest, which anyone could rewrite; only a seal "
                "checked against a key you trust shows who vouches for them"
            )
        elif not any(s.role == SUPPLIER and not s.problem for s in self.signatures):
            out.append("no valid supplier seal")
        out.append(self.approval)
        return out


def check(
    files: dict[str, bytes], document: str | None, revision: str | None, trusted: dict[str, bytes] | None = None
) -> Report:
    """Verify a dossier's files (relative path -> bytes, manifest and signatures included).

    `document` and `revision` are the dossier's identity as its results record states it;
    `trusted` maps a label (the public-key file) to a raw Ed25519 public key.
    """
    if MANIFEST not in files:
        return Report(
            "",
            (),
            (),
            (),
            (),
            (f"{MANIFEST} is missing: this folder is not a dossier output or its integrity manifest was removed",),
        )
    listed, problems = parse_manifest(files[MANIFEST])
    payload = {n: d for n, d in files.items() if is_listed(n)}
    missing = tuple(sorted(set(listed) - set(payload)))
    added = tuple(sorted(set(payload) - set(listed)))
    altered = tuple(sorted(n for n in set(listed) & set(payload) if sha256(payload[n]) != listed[n]))
    digest = sha256(files[MANIFEST])
    signatures = []
    # the supplier's seal first, then the countersignatures
    for name in sorted((n for n in files if not is_listed(n) and n != MANIFEST), key=lambda n: (n != SUPPLIER_SEAL, n)):
        if not name.endswith(".json") or name.count("/") != 1:
            problems.append(f"{name}: only signature files (signatures/*.json) may be added to a dossier")
            continue
        signatures.append(read_signature(name, files[name], digest, document, revision, trusted or {}))
    if any(s.role == APPROVER for s in signatures) and not any(
        s.role == SUPPLIER and not s.problem for s in signatures
    ):
        problems.append("an approver countersigned, but there is no valid supplier seal to countersign")
    return Report(digest, missing, added, altered, tuple(signatures), tuple(problems))


def new_key_pair() -> tuple[bytes, bytes]:
    """Return (private PEM, public PEM) of a fresh Ed25519 key pair."""
    from cryptography.hazmat.primitives import serialization
    from cryptography.hazmat.primitives.asymmetric.ed25519 import Ed25519PrivateKey

    key = Ed25519PrivateKey.generate()
    private = key.private_bytes(
        serialization.Encoding.PEM, serialization.PrivateFormat.PKCS8, serialization.NoEncryption()
    )
    public = key.public_key().public_bytes(serialization.Encoding.PEM, serialization.PublicFormat.SubjectPublicKeyInfo)
    return private, public


# --- an RFC 8493 bag of a built dossier --------------------------------------------------------


def bag_files(
    files: dict[str, bytes], *, external_identifier: str, source_organization: str, bagging_date: str, software: str
) -> dict[str, bytes]:
    """A BagIt bag (RFC 8493 §2) of the dossier's files: payload under ``data/``, the bag
    declaration, bag-info, a payload manifest and a tag manifest, all SHA-256."""
    payload = {f"data/{name}": data for name, data in sorted(files.items())}
    octets = sum(len(d) for d in payload.values())
    tags = {
        "bagit.txt": b"BagIt-Version: 1.0\nTag-File-Character-Encoding: UTF-8\n",  # RFC 8493 §2.1.1
        "bag-info.txt": "".join(
            f"{k}: {_bag_value(v)}\n"
            for k, v in (  # RFC 8493 §2.2.2
                ("Bag-Software-Agent", software),
                ("Bagging-Date", bagging_date),
                ("External-Identifier", external_identifier),
                ("Payload-Oxum", f"{octets}.{len(payload)}"),
                ("Source-Organization", source_organization),
            )
        ).encode("utf-8"),
        "manifest-sha256.txt": "".join(f"{sha256(d)}  {_bag_path(n)}\n" for n, d in payload.items()).encode("utf-8"),
    }
    # RFC 8493 §2.2.1: the tag manifest lists every tag file but itself.
    tags["tagmanifest-sha256.txt"] = "".join(f"{sha256(d)}  {n}\n" for n, d in sorted(tags.items())).encode("utf-8")
    return {**payload, **tags}


def _bag_path(name: str) -> str:
    """RFC 8493 §2.1.3: CR, LF and % in a manifest path are percent-encoded."""
    return name.replace("%", "%25").replace("\r", "%0D").replace("\n", "%0A")


def _bag_value(value: str) -> str:
    return " ".join(str(value).split())  # one line per tag (RFC 8493 §2.2.2)
