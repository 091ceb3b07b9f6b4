import subprocess
import sys

import projects as P

from dossier.cli import main
from dossier.common.errors import EXIT_INPUT, EXIT_OK


def _run(*args):
    return subprocess.run(
        [sys.executable, "-c", "import sys; from dossier.cli import main; sys.exit(main())", *args],
        capture_output=True,
        text=True,
    )


def test_bad_manifest_exits_3_with_located_message_and_no_traceback(tmp_path):
    (tmp_path / "dossier.toml").write_text('[document]\ntitle = "x"\n', encoding="utf-8")
    res = _run("check", str(tmp_path))
    assert res.returncode == EXIT_INPUT
    assert "document.number: is required" in res.stderr
    assert "specimens: is required" in res.stderr
    assert "Traceback" not in res.stderr + res.stdout


def test_missing_project_folder(tmp_path):
    res = _run("build", str(tmp_path / "nope"))
    assert res.returncode == EXIT_INPUT
    assert "is not a folder" in res.stderr and "Traceback" not in res.stderr


def test_bad_rig_file_exits_3_and_writes_nothing(tmp_path):
    (tmp_path / "rig").mkdir()
    (tmp_path / "rig/a.csv").write_text("TIME,SLIP_ANGLE,FZ,FY\n0,0,-4000,0\n0.04,1,-4000\n", encoding="utf-8")
    (tmp_path / "dossier.toml").write_text(
        P.MANIFEST_HEAD + P.specimen_block("A") + P.run_block("A", "rig/a.csv", [4000]), encoding="utf-8"
    )
    out = tmp_path / "out"
    assert main(["build", str(tmp_path), "--out", str(out)]) == EXIT_INPUT
    assert not out.exists()
    assert sorted(p.name for p in tmp_path.iterdir()) == ["dossier.toml", "rig"]


def test_check_reports_the_demo_project_ok(capsys):
    assert main(["check", "demo_project"]) == EXIT_OK
    out = capsys.readouterr().out
    assert "manifest and 19 rig file(s) OK" in out
    assert "rig/HR-4470_CTL-1_1000.csv: 413 samples" in out and ": sound" in out
    assert "test load is above the rated load of 6570 N" in out


def test_every_command_names_its_own_bad_input_without_a_traceback(tmp_path, capsys):
    # inputs of the commands themselves (keys, folders, targets), missing, of the wrong kind or
    # in a place that cannot be written: a user error with its documented code, never exit 70
    (tmp_path / "empty").mkdir()
    (tmp_path / "afile").write_text("x\n", encoding="utf-8")
    missing = str(tmp_path / "missing")
    cases = [
        (["verify", missing], 3, "no such folder"),
        (["verify", str(tmp_path / "afile")], 3, "not a folder"),
        (["verify", str(tmp_path / "empty"), "--public-key", missing], 3, "cannot read the public key"),
        (
            ["verify", str(tmp_path / "empty"), "--public-key", str(tmp_path / "afile")],
            3,
            "expected an Ed25519 public key",
        ),
        (["digest", str(tmp_path / "empty")], 3, "not a dossier output folder"),
        (["diff", str(tmp_path / "empty"), str(tmp_path / "empty")], 3, "no results.json"),
        (["keygen", str(tmp_path / "nofolder/k.pem"), str(tmp_path / "nofolder/k.pub")], 3, "does not exist"),
        (["keygen", "/proc/k.pem", "/proc/k.pub"], 3, "cannot be created"),
        (["export", str(tmp_path / "empty"), str(tmp_path / "bag")], 3, "not a dossier output folder"),
        (["seal", str(tmp_path / "empty"), "--private-key", missing], 3, ""),
    ]
    for args, code, message in cases:
        assert main(args) == code, args
        err = capsys.readouterr().err
        assert "Traceback" not in err and message in err, (args, err)
