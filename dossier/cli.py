"""The command line: ``dossier build``, ``dossier check``.

Exit codes (documented in the README): 0 success; 2 bad command line; 3 manifest or rig data
rejected; 4 a stage could not produce a result it stands behind, or the output folder is not
ours to replace; 5 verification failed (or a dossier that fails it was to be sealed);
70 internal error (a bug). User errors print without a traceback.
"""

from __future__ import annotations

import sys
import traceback
from pathlib import Path

import click

from . import __version__
from .errors import EXIT_INTERNAL, UserError


@click.group(context_settings={"help_option_names": ["-h", "--help"]})
@click.version_option(__version__, prog_name="dossier")
def cli() -> None:
    """Turn tire force-and-moment rig data into an evaluation dossier (HTML site and PDF)."""


@cli.command()
@click.argument("project", type=click.Path(path_type=Path))
@click.option("--out", "out_dir", type=click.Path(path_type=Path), default=None,
              help="Output folder (default: PROJECT/dossier-out). Replaced only if made by dossier.")
@click.option("--theme", default="default", show_default=True, help="Theme name.")
@click.option("--no-cache", is_flag=True, help="Recompute every stage (ignore PROJECT/.dossier-cache).")
@click.option("--workers", type=click.IntRange(1, 64), default=None,
              help="Processes for fits, metrics, figures and PDF volumes, this one included (default: one per CPU); the output does not depend on it.")
def build(project: Path, out_dir: Path | None, theme: str, no_cache: bool, workers: int | None) -> None:
    """Build the dossier of PROJECT (a folder with dossier.toml)."""
    if not no_cache:
        from .freshness import up_to_date

        current = up_to_date(project, out_dir, theme)
        if current is not None:
            click.echo(f"{current}: up to date (inputs, theme and software unchanged; output verified)")
            return
    from .build import build as run_build

    summary = run_build(project, out_dir, theme, use_cache=not no_cache, workers=workers)
    if summary.reused:
        click.echo(f"{summary.out_dir}: up to date (inputs, theme and software unchanged; output verified)")
        return
    click.echo(f"dossier written to {summary.out_dir}: {summary.n_fits} fitted channel(s), {summary.n_metrics} metric "
               f"values, {summary.n_files} files (site/index.html, dossier.pdf, results.json); "
               f"cache: {summary.cache_hits} reused, {summary.cache_misses} computed")


@cli.command()
@click.argument("project", type=click.Path(path_type=Path))
def check(project: Path) -> None:
    """Validate PROJECT's manifest and rig files without building."""
    from .build import check as run_check

    manifest, conditioned = run_check(project)
    for c in conditioned:
        a = c.account
        click.echo(f"{a.source_file}: {a.n_samples} samples, {a.n_kept} kept, "
                   f"{a.operating_points_found} operating point(s): {a.verdict}")
        for reason in a.verdict_reasons:
            click.echo(f"    {reason}")
    click.echo(f"{project}: manifest and {len(conditioned)} rig file(s) OK")


@cli.command()
@click.argument("out", type=click.Path(path_type=Path))
@click.option("--public-key", type=click.Path(path_type=Path), default=None,
              help="PEM file of the Ed25519 public key the seal must have been made with.")
@click.option("--rebuild", is_flag=True, help="Also rebuild from the archived inputs and compare the results.")
def verify(out: Path, public_key: Path | None, rebuild: bool) -> None:
    """Check a built dossier OUT: every file against its integrity manifest, and its seal."""
    from .archive import VerifyError, rebuild_and_compare
    from .archive import verify as run_verify

    report = run_verify(out, public_key)
    for line in report.lines():
        click.echo(line)
    differing = []
    if rebuild:
        differing = rebuild_and_compare(out)
        for name in differing:
            click.echo(f"not reproduced: {name}")
        click.echo("rebuild: " + ("results reproduced byte for byte" if not differing else
                                  f"{len(differing)} file(s) differ"))
    if not report.ok or differing:
        raise VerifyError(f"{out}: verification failed")
    click.echo(f"{out}: all files match the integrity manifest")


@cli.command()
@click.argument("out", type=click.Path(path_type=Path))
@click.option("--private-key", type=click.Path(path_type=Path), required=True, help="PEM file of the Ed25519 private key.")
def seal(out: Path, private_key: Path) -> None:
    """Sign the integrity manifest of a released dossier OUT (the key is never written into OUT)."""
    from .archive import seal as run_seal

    key_id = run_seal(out, private_key)
    click.echo(f"{out}: sealed with key {key_id}")


@cli.command()
@click.argument("private_key", type=click.Path(path_type=Path))
@click.argument("public_key", type=click.Path(path_type=Path))
def keygen(private_key: Path, public_key: Path) -> None:
    """Create an Ed25519 key pair for sealing (PEM files; never overwrites)."""
    from .archive import keygen as run_keygen

    run_keygen(private_key, public_key)
    click.echo(f"private key: {private_key} (keep it out of any dossier folder)\npublic key: {public_key}")


@cli.command()
@click.argument("old", type=click.Path(path_type=Path))
@click.argument("new", type=click.Path(path_type=Path))
def diff(old: Path, new: Path) -> None:
    """Report what changed between two built revisions: inputs, coefficients, metrics, verdicts."""
    from .archive import diff as run_diff

    changes = run_diff(old, new)
    for c in changes:
        click.echo(f"{c.kind}: {c.key}: {c.old} -> {c.new}")
    click.echo(f"{len(changes)} change(s)")


def main(argv: list[str] | None = None) -> int:
    try:
        cli.main(args=argv, prog_name="dossier", standalone_mode=False)
    except click.exceptions.Abort:
        click.echo("aborted", err=True)
        return 1
    except click.ClickException as exc:
        exc.show()
        return exc.exit_code
    except UserError as exc:
        click.echo(f"error: {exc}", err=True)
        return exc.exit_code
    except Exception:  # noqa: BLE001 - the last line of defence
        click.echo("internal error (a bug in dossier; please report it with the text below):", err=True)
        click.echo(traceback.format_exc(), err=True)
        return EXIT_INTERNAL
    return 0




def run() -> None:
    """Console entry point."""
    sys.exit(main())
