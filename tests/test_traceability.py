"""Traceability: PROV-JSON provenance, the integrity manifest, sealing, tampering, diff, rebuild."""

import json
import shutil

import pytest
from prov.model import ProvDocument

from dossier import archive
from dossier.build import build
from dossier.cli import main
from dossier.errors import OutputError
from test_document import RELEASED, make_project


@pytest.fixture(scope="module")
def released(tmp_path_factory):
    root = make_project(tmp_path_factory.mktemp("rel") / "proj", extra=RELEASED)
    out = root.parent / "out"
    build(root, out)
    keys = root.parent / "keys"
    keys.mkdir()
    archive.keygen(keys / "k.pem", keys / "k.pub")
    return root, out, keys


def test_provenance_parses_as_prov_json_and_every_metric_traces_to_a_file_hash(released):
    _, out, _ = released
    text = (out / "provenance.json").read_text(encoding="utf-8")
    doc = ProvDocument.deserialize(content=text, format="json")  # W3C PROV via the `prov` package
    assert doc.get_records()
    raw = json.loads(text)
    derived = {}
    for r in raw["wasDerivedFrom"].values():
        derived.setdefault(r["prov:generatedEntity"], []).append(r["prov:usedEntity"])

    def reaches_a_file(entity, seen=()):
        attrs = raw["entity"].get(entity, {})
        if "d:sha256" in attrs:
            return True
        return any(reaches_a_file(u, seen + (entity,)) for u in derived.get(entity, []) if u not in seen)

    results = json.loads((out / "results.json").read_text(encoding="utf-8"))
    for m in results["metrics"]:
        ident = f"d:metric-{m['specimen']}-{m['metric']}-{m['load_n']:.0f}N"
        assert ident in raw["entity"], ident
        assert reaches_a_file(ident), ident
    rig = [e for e in raw["entity"].values() if e.get("prov:label") == "rig/a.csv"]
    assert rig and rig[0]["d:sha256"] == results["inputs"][0]["sha256"]


def test_every_metric_and_coefficient_links_to_its_provenance(released):
    import re

    _, out, _ = released
    site = out / "site"
    ids = set(re.findall(r'id="([^"]+)"', (site / "provenance.html").read_text(encoding="utf-8")))
    page = (site / "specimen-a.html").read_text(encoding="utf-8")
    links = re.findall(r'href="provenance\.html#([^"]+)"', page)
    assert len(links) > 20 and set(links) <= ids


def test_verify_seal_and_tampering(released, tmp_path):
    root, out, keys = released
    assert archive.verify(out).ok
    copy = tmp_path / "copy"
    shutil.copytree(out, copy)
    key_id = archive.seal(copy, keys / "k.pem")
    assert not any(p.suffix == ".pem" for p in copy.rglob("*"))  # the private key stays outside
    report = archive.verify(copy, keys / "k.pub")
    assert report.ok and report.seal.startswith("valid") and key_id in report.seal

    def tampered(mutate):
        t = tmp_path / f"t{len(list(tmp_path.iterdir()))}"
        shutil.copytree(copy, t)
        mutate(t)
        return archive.verify(t, keys / "k.pub")

    def flip(path):
        data = bytearray(path.read_bytes())
        data[len(data) // 2] ^= 0x01
        path.write_bytes(bytes(data))

    figure = next((copy / "site/figures").glob("*.svg")).name
    r = tampered(lambda t: flip(t / "site/figures" / figure))
    assert not r.ok and r.altered == (f"site/figures/{figure}",)
    assert tampered(lambda t: flip(t / "results.json")).altered == ("results.json",)
    assert tampered(lambda t: flip(t / "dossier.pdf")).altered == ("dossier.pdf",)
    r = tampered(lambda t: (t / "site/extra.html").write_text("x", encoding="utf-8"))
    assert r.added == ("site/extra.html",)
    r = tampered(lambda t: (t / "provenance.json").unlink())
    assert r.missing == ("provenance.json",)

    def forge(t):
        seal = json.loads((t / "seal-ed25519.json").read_text(encoding="utf-8"))
        sig = bytearray(__import__("base64").b64decode(seal["signature"]))
        sig[0] ^= 0x01
        seal["signature"] = __import__("base64").b64encode(bytes(sig)).decode()
        (t / "seal-ed25519.json").write_text(json.dumps(seal), encoding="utf-8")

    r = tampered(forge)
    assert not r.ok and r.seal == "INVALID: the signature does not match manifest-sha256.txt"
    other = tmp_path / "other"
    other.mkdir()
    archive.keygen(other / "o.pem", other / "o.pub")
    r = archive.verify(copy, other / "o.pub")
    assert not r.ok and "different key" in r.seal
    # a released, sealed revision is frozen
    with pytest.raises(OutputError, match="sealed, released revision"):
        build(root, copy)
    # and the command line says so with exit code 5 for a tampered copy
    bad = tmp_path / "bad"
    shutil.copytree(copy, bad)
    flip(bad / "results.json")
    assert main(["verify", str(bad), "--public-key", str(keys / "k.pub")]) == 5


def test_only_released_revisions_are_sealed(tmp_path):
    root = make_project(tmp_path / "p")
    build(root, tmp_path / "o")
    archive.keygen(tmp_path / "k.pem", tmp_path / "k.pub")
    with pytest.raises(archive.VerifyError, match="only a released revision is sealed"):
        archive.seal(tmp_path / "o", tmp_path / "k.pem")
    with pytest.raises(Exception, match="will not overwrite"):
        archive.keygen(tmp_path / "k.pem", tmp_path / "k2.pub")


def test_diff_and_rebuild(released, tmp_path):
    root, out, _ = released
    assert archive.rebuild_and_compare(out) == []  # rebuilt from out/inputs, byte for byte
    changed = make_project(tmp_path / "p2", scale=1.05, extra=RELEASED)
    build(changed, tmp_path / "o2")
    changes = archive.diff(out, tmp_path / "o2")
    kinds = {c.kind for c in changes}
    assert {"input", "coefficient", "metric"} <= kinds
    assert any(c.key == "A cornering_stiffness at 4000 N" for c in changes)
    assert archive.diff(out, out) == []
