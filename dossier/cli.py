"""The command line: ``dossier build``, ``dossier check``.

Exit codes (documented in the README): 0 success; 2 bad command line; 3 manifest or rig data
rejected; 4 a stage could not produce a result it stands behind, or the output folder is not
ours to replace; 70 internal error (a bug). User errors print without a traceback.
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
def build(project: Path, out_dir: Path | None, theme: str) -> None:
    """Build the dossier of PROJECT (a folder with dossier.toml)."""
    from .build import build as run_build

    summary = run_build(project, out_dir, theme)
    click.echo(f"dossier written to {summary.out_dir}: {summary.n_fits} fitted channel(s), {summary.n_metrics} metric "
               f"values, {summary.n_files} files (site/index.html, dossier.pdf, results.json)")


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
