"""The command line: build, check, verify, digest, seal, countersign, export, keygen, diff.

Exit codes (documented in the README and :mod:`dossier.common.errors`): 0 success; 1 a prompt was
aborted; 2 bad command line;
3 manifest, rig data or another input rejected; 4 a stage could not produce a result it stands
behind, or the output folder is not ours to replace; 5 verification failed; 6 the dossier's
state does not allow this (sealing a draft); 7 intact, but a signer was not checked against a
trusted key; 70 internal error (a bug); 130 and 143 stopped by SIGINT (Ctrl-C) or SIGTERM.
User errors print without a traceback.
"""

from __future__ import annotations

import sys
import traceback
from pathlib import Path

import click

from . import __version__
from .common.errors import EXIT_ABORTED, EXIT_INTERNAL, UserError


@click.group(context_settings={"help_option_names": ["-h", "--help"]})
@click.version_option(__version__, prog_name="dossier")
def cli() -> None:
    """Turn tire force-and-moment rig data into an evaluation dossier (HTML site and PDF)."""


@cli.command()
@click.argument("project", type=click.Path(path_type=Path))
@click.option(
    "--out",
    "out_dir",
    type=click.Path(path_type=Path),
    default=None,
    help="Output folder (default: PROJECT/dossier-out). Replaced only if made by dossier.",
)
@click.option("--theme", default="default", show_default=True, help="Theme name.")
@click.option("--no-cache", is_flag=True, help="Recompute every stage (ignore PROJECT/.dossier-cache).")
@click.option(
    "--workers",
    type=click.IntRange(1, 64),
    default=None,
    help="Processes for fits, metrics, figures and PDF volumes, this one included (default: "
    "one per CPU); the output does not depend on it.",
)
def build(project: Path, out_dir: Path | None, theme: str, no_cache: bool, workers: int | None) -> None:
    """Build the dossier of PROJECT (a folder with dossier.toml)."""
    from .project.load import load_project

    loaded = load_project(project)  # validated and read once, for the freshness check and the build
    if not no_cache:
        from .engine.freshness import up_to_date  # light: decides before the heavy stages are imported

        current = up_to_date(loaded, out_dir, theme)
        if current is not None:
            click.echo(f"{current}: up to date (inputs, theme and software unchanged; output verified)")
            return
    from .engine.build import build as run_build

    summary = run_build(loaded, out_dir, theme, use_cache=not no_cache, workers=workers)
    if summary.reused:
        click.echo(f"{summary.out_dir}: up to date (inputs, theme and software unchanged; output verified)")
        return
    click.echo(
        f"dossier written to {summary.out_dir}: {summary.n_fits} fitted channel(s), {summary.n_metrics} metric "
        f"values, {summary.n_files} files (site/index.html, dossier.pdf, results.json); "
        f"cache: {summary.cache_hits} reused, {summary.cache_misses} computed"
    )


@cli.command()
@click.argument("project", type=click.Path(path_type=Path))
def check(project: Path) -> None:
    """Validate PROJECT's manifest and rig files without building."""
    from .engine.build import check as run_check
    from .project.load import load_project

    conditioned = run_check(load_project(project))
    for c in conditioned:
        a = c.account
        click.echo(
            f"{a.source_file}: {a.n_samples} samples, {a.n_kept} kept, "
            f"{a.operating_points_found} operating point(s): {a.verdict}"
        )
        for reason in a.verdict_reasons:
            click.echo(f"    {reason}")
    click.echo(f"{project}: manifest and {len(conditioned)} rig file(s) OK")


@cli.command()
@click.argument("target", type=click.Path(path_type=Path))
@click.option(
    "--public-key",
    "public_keys",
    type=click.Path(path_type=Path),
    multiple=True,
    help="PEM file of an Ed25519 public key you trust (the supplier's, the approver's); repeat for each.",
)
@click.option("--rebuild", is_flag=True, help="Also rebuild from the archived inputs and compare every file.")
def verify(target: Path, public_keys: tuple[Path, ...], rebuild: bool) -> None:
    """Check a built dossier TARGET (its folder, or its report PDF alone).

    A folder: every file against manifest-sha256.txt and every signature in signatures/. A report
    PDF: every file it carries against the integrity manifest it carries. Exit 0 when everything
    holds, 5 when something does not, 7 when intact but a signature's key was not among --public-key.
    """
    from .common.errors import UncheckedError, VerifyError
    from .engine import rebuild as rebuilding
    from .publish import archive, integrity

    if target.is_file() and target.suffix.lower() == ".pdf":
        pdf = archive.verify_report_pdf(target)
        for line in pdf.lines():
            click.echo(line)
        rebuilt = rebuilding.rebuild_report_pdf(target) if rebuild and pdf.ok else None
        for line in rebuilt.lines() if rebuilt else ():
            click.echo(line)
        if not pdf.ok or (rebuilt and not rebuilt.reproduced):
            raise VerifyError(f"{target}: verification failed")
        click.echo(f"{target}: every file it carries matches its attached integrity manifest")
        return
    report = archive.verify(target, public_keys)
    for line in report.lines():
        click.echo(line)
    rebuilt = rebuilding.rebuild_and_compare(target) if rebuild and report.files_ok else None
    for line in rebuilt.lines() if rebuilt else ():
        click.echo(line)
    if report.state == integrity.FAILED or (rebuilt and not rebuilt.reproduced):
        raise VerifyError(f"{target}: verification failed")
    if report.state == integrity.UNCHECKED:
        raise UncheckedError(
            f"{target}: the files are intact and the signatures consistent, but not every signer "
            "was checked: pass --public-key with the public key of each signer you trust"
        )
    click.echo(
        f"{target}: all files match the integrity manifest"
        + ("; every signature checked against a key given" if report.signatures else "")
    )


@cli.command()
@click.argument("out", type=click.Path(path_type=Path))
@click.option(
    "--private-key",
    type=click.Path(path_type=Path),
    required=True,
    help="PEM file of the supplier's Ed25519 private key (read, never copied).",
)
@click.option("--signer", default=None, help="Name of the person sealing (default: the first author).")
@click.option("--organisation", default=None, help="Their organisation (default: the supplier).")
def seal(out: Path, private_key: Path, signer: str | None, organisation: str | None) -> None:
    """Seal a released dossier OUT as the supplier: sign its digest (then it is frozen)."""
    from .publish.archive import seal as run_seal

    key_id = run_seal(out, private_key, signer, organisation)
    click.echo(f"{out}: sealed with key {key_id} (signatures/supplier-seal.json)")


@cli.command()
@click.argument("out", type=click.Path(path_type=Path))
def digest(out: Path) -> None:
    """Print the digest of a built dossier OUT, the value an approver countersigns."""
    from .publish.archive import digest as run_digest

    value, ident = run_digest(out)
    click.echo(f"{value}  {ident['number']} rev. {ident['revision']} ({ident['status']})")


@cli.command()
@click.argument("out", type=click.Path(path_type=Path), required=False)
@click.option(
    "--private-key",
    type=click.Path(path_type=Path),
    required=True,
    help="PEM file of the approver's own Ed25519 private key (read, never copied).",
)
@click.option(
    "--statement",
    type=click.Choice(["approved", "approved with deviation", "rejected"]),
    required=True,
    help="What the approver states about this revision.",
)
@click.option("--reason", default="", help="Why (required for a deviation or a rejection).")
@click.option("--signer", required=True, help="The approver's name.")
@click.option("--organisation", default="", help="The approver's organisation.")
@click.option(
    "--digest",
    "digest_hex",
    default=None,
    help="Countersign this digest (from `dossier digest`) instead of a dossier folder; needs "
    "--document, --revision and --signature-out.",
)
@click.option("--document", default=None, help="With --digest: the document number.")
@click.option("--revision", default=None, help="With --digest: the revision.")
@click.option(
    "--signature-out",
    type=click.Path(path_type=Path),
    default=None,
    help="With --digest: where to write the signature file (then put it into the dossier's signatures/).",
)
def countersign(
    out: Path | None,
    private_key: Path,
    statement: str,
    reason: str,
    signer: str,
    organisation: str,
    digest_hex: str | None,
    document: str | None,
    revision: str | None,
    signature_out: Path | None,
) -> None:
    """Countersign a sealed dossier OUT as the customer's approver, with your own key."""
    from .common.errors import UserError as _UserError
    from .publish.archive import countersign as run_countersign

    if (out is None) == (digest_hex is None):
        raise _UserError("countersign: give either the dossier folder OUT or --digest (not both)")
    if digest_hex is not None and signature_out is None:
        raise _UserError("--signature-out: needed with --digest (where to write the signature file)")
    path = run_countersign(
        private_key,
        statement,
        reason,
        signer,
        organisation,
        folder=out,
        digest_hex=digest_hex,
        document=document,
        revision=revision,
        out=signature_out,
    )
    click.echo(f"countersigned ({statement}): {path}")


@cli.command()
@click.argument("out", type=click.Path(path_type=Path))
@click.argument("bag", type=click.Path(path_type=Path))
@click.option("--zip", "as_zip", is_flag=True, help="Write the bag as one zip file instead of a folder.")
def export(out: Path, bag: Path, as_zip: bool) -> None:
    """Export a built dossier OUT as a BagIt bag (RFC 8493) at BAG, for an archive intake."""
    from .publish.archive import export as run_export

    click.echo(f"bag written: {run_export(out, bag, as_zip)}")


@cli.command()
@click.argument("private_key", type=click.Path(path_type=Path))
@click.argument("public_key", type=click.Path(path_type=Path))
def keygen(private_key: Path, public_key: Path) -> None:
    """Create an Ed25519 key pair for signing (PEM files; never overwrites)."""
    from .publish.archive import keygen as run_keygen

    run_keygen(private_key, public_key)
    click.echo(
        f"private key: {private_key} (keep it on your machine, out of any dossier folder)\n"
        f"public key: {public_key} (give it to whoever verifies your signatures)"
    )


@cli.command()
@click.argument("old", type=click.Path(path_type=Path))
@click.argument("new", type=click.Path(path_type=Path))
def diff(old: Path, new: Path) -> None:
    """Report what changed between two built revisions: inputs, coefficients, metrics, verdicts."""
    from .publish.archive import diff as run_diff

    changes = run_diff(old, new)
    for c in changes:
        click.echo(f"{c.kind}: {c.key}: {c.old} -> {c.new}")
    click.echo(f"{len(changes)} change(s)")


def main(argv: list[str] | None = None) -> int:
    # Ctrl-C and SIGTERM raise interrupts.Interrupted: the build cleans up on its way out, and
    # here it ends with one line and exit 130 or 143, without a traceback
    from .common import interrupts

    args = sys.argv[1:] if argv is None else list(argv)
    command = next((a for a in args if not a.startswith("-")), None)
    guard = interrupts.Guard()
    with guard:
        try:
            try:
                cli.main(args=argv, prog_name="dossier", standalone_mode=False)
            except click.exceptions.Abort as exc:
                if isinstance(exc.__cause__, KeyboardInterrupt):  # click's own name for a Ctrl-C
                    raise exc.__cause__ from None
                click.echo("aborted", err=True)
                return EXIT_ABORTED
            except click.ClickException as exc:
                exc.show()
                return exc.exit_code
            except UserError as exc:
                click.echo(f"error: {exc}", err=True)
                return exc.exit_code
            except Exception:
                click.echo("internal error (a bug in dossier; please report it with the text below):", err=True)
                click.echo(traceback.format_exc(), err=True)
                return EXIT_INTERNAL
            return 0
        except (interrupts.Interrupted, KeyboardInterrupt) as exc:
            interrupts.acknowledge(exc)
            click.echo(guard.message(command), err=True)
            return interrupts.exit_code(exc)


def run() -> None:
    """Console entry point."""
    code = main()
    from .common import interrupts

    interrupts.ignore()  # the process ends here: a late Ctrl-C must not print a traceback at shutdown
    if code in interrupts.EXIT_CODES.values():
        interrupts.leave(code)  # cleaned up already: skip the second it takes to free the whole heap
    sys.exit(code)
