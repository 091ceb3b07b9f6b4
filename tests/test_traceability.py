"""Traceability: PROV-JSON provenance, the integrity manifest, sealing, tampering, diff, rebuild."""

import json
import shutil

import pytest
from prov.model import ProvDocument
from test_document import RELEASED, make_project

from dossier.cli import main
from dossier.common.errors import OutputError, StateError
from dossier.engine import rebuild
from dossier.engine.build import build
from dossier.publish import archive
from dossier.publish.provenance import metric_id


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
        condition = None if m["nominal_condition"] else (m["camber_deg"], m["pressure_kpa"])
        ident = metric_id(m["specimen"], m["metric"], m["load_n"], condition)
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


def _tampered(src, tmp_path, mutate):
    t = tmp_path / f"t{len(list(tmp_path.iterdir()))}"
    shutil.copytree(src, t)
    mutate(t)
    return t


def _flip(path):
    data = bytearray(path.read_bytes())
    data[len(data) // 2] ^= 0x01
    path.write_bytes(bytes(data))


@pytest.fixture(scope="module")
def sealed(released, tmp_path_factory):
    """The released dossier sealed by the supplier (key s) and countersigned by the approver (key c)."""
    root, out, keys = released
    copy = tmp_path_factory.mktemp("sealed") / "copy"
    shutil.copytree(out, copy)
    archive.keygen(keys / "c.pem", keys / "c.pub")
    archive.seal(copy, keys / "k.pem", "S. Supplier", "Supplier Ltd")
    return copy, keys


def test_verify_lists_every_signature_and_checks_the_keys_given(sealed, tmp_path, capsys):
    copy, keys = sealed
    assert not any(p.suffix == ".pem" for p in copy.rglob("*"))  # private keys stay outside
    report = archive.verify(copy, [keys / "k.pub"])
    assert report.ok and report.state == "intact" and report.approval == "customer approval: not signed"
    (supplier,) = report.signatures
    assert supplier.role == "supplier" and supplier.signer == "S. Supplier" and supplier.trusted_as == "k.pub"
    # without a key, the seal is consistent but nobody checked who made it: not reported valid
    assert main(["verify", str(copy)]) == 7
    assert "NOT checked" in capsys.readouterr().out
    # the approver countersigns the same digest with their own key
    signed = _tampered(copy, tmp_path, lambda t: None)
    path = archive.countersign(
        keys / "c.pem",
        "approved with deviation",
        "Mz at 8 kN above the window",
        "A. Approver",
        "Vehicle Maker",
        folder=signed,
    )
    report = archive.verify(signed, [keys / "k.pub", keys / "c.pub"])
    assert report.ok, report.lines()
    roles = {s.role: s for s in report.signatures}
    assert roles["approver"].statement == "approved with deviation" and roles["approver"].trusted_as == "c.pub"
    assert roles["approver"].digest == roles["supplier"].digest == report.digest
    assert report.approval == "customer approval: approved with deviation by A. Approver (Mz at 8 kN above the window)"
    assert path.parent.name == "signatures"
    assert main(["verify", str(signed), "--public-key", str(keys / "k.pub")]) == 7  # the approver's key not given
    assert main(["verify", str(signed), "--public-key", str(keys / "k.pub"), "--public-key", str(keys / "c.pub")]) == 0


def test_countersigning_from_the_digest_alone(sealed, tmp_path, capsys):
    copy, keys = sealed
    assert main(["digest", str(copy)]) == 0
    value = capsys.readouterr().out.split()[0]
    sig = tmp_path / "approval.json"
    assert (
        main(
            [
                "countersign",
                "--digest",
                value,
                "--document",
                "T-0001",
                "--revision",
                "A",
                "--private-key",
                str(keys / "c.pem"),
                "--statement",
                "approved",
                "--signer",
                "A. Approver",
                "--signature-out",
                str(sig),
            ]
        )
        == 0
    )
    target = _tampered(copy, tmp_path, lambda t: shutil.copy(sig, t / "signatures" / "approver.json"))
    report = archive.verify(target, [keys / "k.pub", keys / "c.pub"])
    assert report.ok and report.approval == "customer approval: approved by A. Approver"
    # a signature of another document or revision is refused
    wrong = tmp_path / "wrong.json"
    assert (
        main(
            [
                "countersign",
                "--digest",
                value,
                "--document",
                "T-0001",
                "--revision",
                "B",
                "--private-key",
                str(keys / "c.pem"),
                "--statement",
                "approved",
                "--signer",
                "A. Approver",
                "--signature-out",
                str(wrong),
            ]
        )
        == 0
    )
    target = _tampered(copy, tmp_path, lambda t: shutil.copy(wrong, t / "signatures" / "approver.json"))
    assert "names T-0001 rev. B" in " ".join(archive.verify(target, [keys / "k.pub", keys / "c.pub"]).lines())


def test_editing_any_file_or_signature_field_fails_verification(sealed, tmp_path):
    copy, keys = sealed
    trusted = [keys / "k.pub"]
    figure = next((copy / "site/figures").glob("*.svg")).name

    def verify(mutate):
        return archive.verify(_tampered(copy, tmp_path, mutate), trusted)

    r = verify(lambda t: _flip(t / "site/figures" / figure))
    assert r.state == "failed" and r.altered == (f"site/figures/{figure}",)
    for name in ("results.json", "dossier.pdf", "environment.json", "pdf-fonts.json", "inputs/dossier.toml"):
        assert verify(lambda t: _flip(t / name)).altered == (name,), name
    assert verify(lambda t: (t / "site/extra.html").write_text("x", encoding="utf-8")).added == ("site/extra.html",)
    assert verify(lambda t: (t / "provenance.json").unlink()).missing == ("provenance.json",)
    linked = verify(lambda t: (t / "site/notes.html").symlink_to("/etc/hostname"))
    assert linked.state == "failed"  # a link out of the dossier is reported, not skipped
    assert linked.problems == (
        "not a regular file (a dossier holds none): site/notes.html (symbolic link to /etc/hostname)",
    )

    def manifest_line_removed(t):
        lines = (t / "manifest-sha256.txt").read_text(encoding="utf-8").splitlines()
        (t / "manifest-sha256.txt").write_text("\n".join(lines[1:]) + "\n", encoding="utf-8")

    r = verify(manifest_line_removed)
    assert r.state == "failed" and "this dossier's digest is" in r.signatures[0].problem

    def seal_field(field, value):
        def mutate(t):
            seal = json.loads((t / "signatures/supplier-seal.json").read_text(encoding="utf-8"))
            seal[field] = value
            (t / "signatures/supplier-seal.json").write_text(json.dumps(seal), encoding="utf-8")

        return mutate

    for field, value in (
        ("revision", "Z"),
        ("document", "OTHER"),
        ("signer", "Someone Else"),
        ("statement", "approved"),
    ):
        r = verify(seal_field(field, value))
        assert r.state == "failed" and "does not match its fields" in r.signatures[0].problem, field
    r = verify(lambda t: (t / "signatures/notes.txt").write_text("x", encoding="utf-8"))
    assert r.state == "failed" and any("only signature files" in p for p in r.problems)


def test_a_copy_resealed_with_a_strangers_key_is_not_valid(sealed, tmp_path, capsys):
    copy, keys = sealed
    stranger = tmp_path / "stranger"
    stranger.mkdir()
    archive.keygen(stranger / "x.pem", stranger / "x.pub")

    def forge(t):
        _flip(t / "site/index.html")
        (t / "signatures/supplier-seal.json").unlink()
        files = archive.read_folder(t)
        (t / "manifest-sha256.txt").write_bytes(
            __import__("dossier.publish.integrity", fromlist=["x"]).manifest_bytes(files)
        )
        archive.seal(t, stranger / "x.pem")

    forged = _tampered(copy, tmp_path, forge)
    assert main(["verify", str(forged)]) == 7  # intact in itself, but not reported valid
    assert "NOT checked" in capsys.readouterr().out
    assert main(["verify", str(forged), "--public-key", str(keys / "k.pub")]) == 7
    assert archive.verify(forged, [keys / "k.pub"]).state == "intact, signers not checked"


def test_sealing_rules_and_their_exit_codes(released, sealed, tmp_path):
    root, _, keys = released
    copy, _ = sealed
    with pytest.raises(OutputError, match="sealed, released revision"):  # a sealed revision is frozen
        build(root, copy)
    assert main(["seal", str(copy), "--private-key", str(keys / "k.pem")]) == 6  # already sealed
    bad = _tampered(copy, tmp_path, lambda t: _flip(t / "results.json"))
    assert main(["verify", str(bad), "--public-key", str(keys / "k.pub")]) == 5
    unsealed = _tampered(copy, tmp_path, lambda t: shutil.rmtree(t / "signatures"))
    assert (
        main(
            [
                "countersign",
                str(unsealed),
                "--private-key",
                str(keys / "c.pem"),
                "--statement",
                "approved",
                "--signer",
                "A. Approver",
            ]
        )
        == 6
    )
    assert (
        main(
            [
                "countersign",
                str(copy),
                "--private-key",
                str(keys / "c.pem"),
                "--statement",
                "rejected",
                "--signer",
                "A. Approver",
            ]
        )
        == 3
    )  # a rejection needs a reason


def test_only_released_revisions_are_sealed(tmp_path):
    root = make_project(tmp_path / "p")
    build(root, tmp_path / "o")
    archive.keygen(tmp_path / "k.pem", tmp_path / "k.pub")
    with pytest.raises(StateError, match="only a released revision is sealed"):
        archive.seal(tmp_path / "o", tmp_path / "k.pem")
    assert main(["seal", str(tmp_path / "o"), "--private-key", str(tmp_path / "k.pem")]) == 6
    with pytest.raises(Exception, match="will not overwrite"):
        archive.keygen(tmp_path / "k.pem", tmp_path / "k2.pub")


def test_the_report_pdf_alone_can_be_checked_and_rebuilt_from(released, tmp_path, capsys):
    _, out, _ = released
    report = out / "dossier.pdf"
    checked = archive.verify_report_pdf(report)
    assert checked.ok and checked.attached > 5, checked.lines()
    from dossier.document.pdfa import attachments

    carried = attachments(report.read_bytes())
    assert {
        "inputs/dossier.toml",
        "inputs/rig/a.csv",
        "inputs/notes/summary.md",
        "results.json",
        "integrity/manifest-sha256.txt",
        "environment.json",
    } <= carried.keys()
    assert main(["verify", str(report), "--rebuild"]) == 0
    assert "every file reproduced byte for byte" in capsys.readouterr().out
    # a PDF whose attached rig file was changed is caught from the PDF alone
    import io

    import pikepdf

    with pikepdf.open(report) as pdf:
        for name, spec in pdf.attachments.items():
            if name.endswith("rig_a.csv"):
                stream = spec.obj.EF.F
                data = stream.read_bytes().replace(b"1", b"2", 1)
                stream.write(data)  # a careful forger also makes the file's own checksum agree
                stream.Params.CheckSum = pikepdf.String(__import__("hashlib").md5(data).digest())
        buf = io.BytesIO()
        pdf.save(buf)
    altered = tmp_path / "altered.pdf"
    altered.write_bytes(buf.getvalue())
    assert archive.verify_report_pdf(altered).altered == ("inputs/rig/a.csv",)
    assert main(["verify", str(altered)]) == 5


def test_export_writes_a_bag_the_bagit_library_accepts(sealed, tmp_path):
    import zipfile

    import bagit

    copy, _ = sealed
    bag_dir = archive.export(copy, tmp_path / "bag")
    bag = bagit.Bag(str(bag_dir))
    bag.validate()  # RFC 8493, as the reference `bagit` package reads it (tag manifest included)
    assert (bag_dir / "data/signatures/supplier-seal.json").is_file() and (bag_dir / "tagmanifest-sha256.txt").is_file()
    assert bag.info["External-Identifier"].startswith("T-0001")
    zipped = archive.export(copy, tmp_path / "bag.zip", as_zip=True)
    with zipfile.ZipFile(zipped) as z:
        z.extractall(tmp_path / "unzipped")
    bagit.Bag(str(tmp_path / "unzipped/bag")).validate()
    assert main(["export", str(copy), str(tmp_path / "bag")]) == 3  # never overwrites
    # the output folder itself no longer claims to be a bag
    assert not (copy / "bagit.txt").exists() and not (copy / "bag-info.txt").exists()


def test_commands_given_a_missing_or_foreign_folder_are_user_errors(released, tmp_path, capsys):
    _, out, keys = released
    foreign = tmp_path / "foreign"
    foreign.mkdir()
    (foreign / "x.txt").write_text("x", encoding="utf-8")
    missing = tmp_path / "missing"
    for args in (
        ["diff", str(out), str(missing)],
        ["diff", str(foreign), str(out)],
        ["verify", str(missing)],
        ["verify", str(foreign)],
        ["digest", str(foreign)],
        ["export", str(missing), str(tmp_path / "b")],
        ["seal", str(foreign), "--private-key", str(keys / "k.pem")],
        ["check", str(missing)],
        ["build", str(foreign)],
        ["verify", str(tmp_path / "none.pdf")],
    ):
        code = main(args)
        err = capsys.readouterr().err
        assert code in (3, 5), (args, code, err)
        assert "Traceback" not in err and err.startswith("error: "), (args, err)


def test_diff_and_rebuild(released, tmp_path):
    root, out, _ = released
    assert rebuild.rebuild_and_compare(out).reproduced  # rebuilt from out/inputs, byte for byte
    changed = make_project(tmp_path / "p2", scale=1.05, extra=RELEASED)
    build(changed, tmp_path / "o2")
    changes = archive.diff(out, tmp_path / "o2")
    kinds = {c.kind for c in changes}
    assert {"input", "coefficient", "metric"} <= kinds
    assert any(c.key == "A cornering_stiffness at 4000 N" for c in changes)
    assert archive.diff(out, out) == []
