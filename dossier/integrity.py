"""Integrity of a built dossier: a BagIt-style manifest of every file, and its Ed25519 seal.

Follows BagIt (RFC 8493) where it fits: ``bagit.txt`` declares the version, ``manifest-sha256.txt``
lists ``<sha256>  <path>`` for every payload file, ``bag-info.txt`` carries the software, the
document and the Payload-Oxum. Unlike a strict bag, the payload stays at the top of the output
folder (not under ``data/``) so that the site opens as built. The seal signs the exact bytes of
``manifest-sha256.txt`` with Ed25519 (RFC 8032); the signature names the key it was made with.
All functions here are pure: they take and return bytes.
"""

from __future__ import annotations

import base64
import hashlib
import json
from dataclasses import dataclass

from . import __version__

BAGIT = "bagit.txt"
MANIFEST = "manifest-sha256.txt"
BAG_INFO = "bag-info.txt"
SEAL = "seal-ed25519.json"
TAG_FILES = (BAGIT, MANIFEST, BAG_INFO, SEAL)


def tag_files(payload: dict[str, bytes], document_number: str, revision: str) -> dict[str, bytes]:
    """Return the tag files (bagit.txt, manifest-sha256.txt, bag-info.txt) for `payload`."""
    lines = [f"{hashlib.sha256(data).hexdigest()}  {name}" for name, data in sorted(payload.items())]
    octets = sum(len(d) for d in payload.values())
    return {
        BAGIT: b"BagIt-Version: 1.0\nTag-File-Character-Encoding: UTF-8\n",
        MANIFEST: ("\n".join(lines) + "\n").encode("utf-8"),
        BAG_INFO: (f"Bag-Software-Agent: dossier {__version__}\nExternal-Identifier: {document_number} rev. {revision}\n"
                   f"Payload-Oxum: {octets}.{len(payload)}\n").encode("utf-8"),
    }


@dataclass(frozen=True)
class Report:
    """What verification found; `ok` only if nothing is missing, added or altered and the seal holds."""

    missing: tuple[str, ...]
    added: tuple[str, ...]
    altered: tuple[str, ...]
    seal: str  # "not sealed", "valid", or a reason it fails
    problems: tuple[str, ...] = ()

    @property
    def ok(self) -> bool:
        return not (self.missing or self.added or self.altered or self.problems) and not self.seal.startswith("INVALID")

    def lines(self) -> list[str]:
        out = [f"missing: {p}" for p in self.missing] + [f"added: {p}" for p in self.added]
        out += [f"altered: {p}" for p in self.altered] + list(self.problems) + [f"seal: {self.seal}"]
        return out


def check(files: dict[str, bytes], public_key_pem: bytes | None = None) -> Report:
    """Verify a dossier's files (relative path → bytes, tag files included) against its manifest."""
    if MANIFEST not in files:
        return Report((), (), (), "not sealed", (f"{MANIFEST} is missing: this folder is not a dossier output "
                                                 "or its integrity manifest was removed",))
    listed: dict[str, str] = {}
    problems = []
    for i, line in enumerate(files[MANIFEST].decode("utf-8", "replace").splitlines(), 1):
        if not line.strip():
            continue
        digest, _, name = line.partition("  ")
        if len(digest) != 64 or not name:
            problems.append(f"{MANIFEST}, line {i}: expected '<sha256>  <path>'; found {line[:60]!r}")
            continue
        listed[name] = digest
    payload = {n: d for n, d in files.items() if n not in TAG_FILES}
    missing = tuple(sorted(set(listed) - set(payload)))
    added = tuple(sorted(set(payload) - set(listed)))
    altered = tuple(sorted(n for n in set(listed) & set(payload) if hashlib.sha256(payload[n]).hexdigest() != listed[n]))
    return Report(missing, added, altered, _seal_status(files, public_key_pem), tuple(problems))


def _seal_status(files: dict[str, bytes], public_key_pem: bytes | None) -> str:
    from cryptography.exceptions import InvalidSignature
    from cryptography.hazmat.primitives import serialization
    from cryptography.hazmat.primitives.asymmetric.ed25519 import Ed25519PublicKey

    if SEAL not in files:
        return "INVALID: not sealed, but a public key was given" if public_key_pem else "not sealed"
    try:
        seal = json.loads(files[SEAL])
        signature = base64.b64decode(seal["signature"])
        embedded = base64.b64decode(seal["public_key"])
    except (ValueError, KeyError, TypeError) as exc:
        return f"INVALID: {SEAL} cannot be read ({exc})"
    key = Ed25519PublicKey.from_public_bytes(embedded)
    if public_key_pem is not None:
        try:
            given = serialization.load_pem_public_key(public_key_pem)
        except ValueError as exc:
            return f"INVALID: the public key given cannot be read ({exc})"
        if not isinstance(given, Ed25519PublicKey):
            return "INVALID: the public key given is not an Ed25519 key"
        if given.public_bytes(serialization.Encoding.Raw, serialization.PublicFormat.Raw) != embedded:
            return "INVALID: sealed with a different key than the one given"
        key = given
    try:
        key.verify(signature, files.get(MANIFEST, b""))
    except InvalidSignature:
        return f"INVALID: the signature does not match {MANIFEST}"
    who = f"key {seal.get('key_id', '?')}"
    return f"valid ({who}{', checked against the key given' if public_key_pem else ', key not checked: pass --public-key'})"


def seal_bytes(manifest_bytes: bytes, private_key_pem: bytes, document: str, revision: str) -> bytes:
    """Return the seal file for `manifest_bytes`, signed with the Ed25519 private key."""
    from cryptography.hazmat.primitives import serialization
    from cryptography.hazmat.primitives.asymmetric.ed25519 import Ed25519PrivateKey

    key = serialization.load_pem_private_key(private_key_pem, password=None)
    if not isinstance(key, Ed25519PrivateKey):
        raise ValueError("the private key is not an Ed25519 key")
    pub = key.public_key().public_bytes(serialization.Encoding.Raw, serialization.PublicFormat.Raw)
    record = {"algorithm": "Ed25519", "signed_file": MANIFEST, "document": document, "revision": revision,
              "public_key": base64.b64encode(pub).decode(), "key_id": hashlib.sha256(pub).hexdigest()[:16],
              "signature": base64.b64encode(key.sign(manifest_bytes)).decode()}
    return (json.dumps(record, indent=2) + "\n").encode("utf-8")


def new_key_pair() -> tuple[bytes, bytes]:
    """Return (private PEM, public PEM) of a fresh Ed25519 key pair."""
    from cryptography.hazmat.primitives import serialization
    from cryptography.hazmat.primitives.asymmetric.ed25519 import Ed25519PrivateKey

    key = Ed25519PrivateKey.generate()
    private = key.private_bytes(serialization.Encoding.PEM, serialization.PrivateFormat.PKCS8,
                                serialization.NoEncryption())
    public = key.public_key().public_bytes(serialization.Encoding.PEM, serialization.PublicFormat.SubjectPublicKeyInfo)
    return private, public
