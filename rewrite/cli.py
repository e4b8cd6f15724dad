"""The ``samebits`` command: click commands only; the work is in ``api``."""
from __future__ import annotations

import sys
from dataclasses import replace
from pathlib import Path

import click

from . import __version__, api
from .config import ConfigError, load, with_samples
from .edits import EFFECTS
from .report import diff as diff_report
from .report import json_report, text

_paths = click.argument("paths", nargs=-1, required=True, type=click.Path())
_effect = click.option("--effect", type=click.Choice(EFFECTS), default=None,
                       help="Propose only edits of this effect.")
_config = click.option("--config", "config_path", type=click.Path(exists=True, dir_okay=False), default=None,
                       help="Read options from this TOML file instead of the nearest "
                            "samebits.toml / pyproject.toml [tool.samebits].")
_chain_order = click.option("--chain-order", type=click.Choice(["written", "balanced", "accurate"]), default=None,
                            help="Order for chains: written (default, bit-for-bit), balanced or accurate "
                                 "(both answer-changing).")
_samples = click.option("--samples", "samples_path", type=click.Path(exists=True, dir_okay=False), default=None,
                        help="JSON file of value samples or ranges per variable, for --chain-order accurate.")
_jobs = click.option("--jobs", type=click.IntRange(min=0), default=None,
                     help="Processes for a run over many files (default: one per core; 1: none).")
_line_length = click.option("--line-length", type=click.IntRange(min=0), default=None,
                            help="Free-form line limit (default 132; 0: no limit).")


def _rewrite_options(command):
    """The options every rewriting command takes."""
    for option in reversed((_paths, _effect, _config, _line_length, _chain_order, _samples, _jobs)):
        command = option(command)
    return command


def _rewrite(paths, effect, config_path, line_length, chain_order, samples_path, jobs):
    """Results for the paths under the merged options, with problems reported; (results, failed)."""
    options = _options(paths, effect, config_path, line_length, chain_order, samples_path)
    if jobs is not None:
        options = replace(options, jobs=jobs)
    results = api.rewrite_paths(list(paths), options)
    return results, _report_problems(results)


def _options(paths, effect, config_path, line_length, chain_order=None, samples_path=None):
    try:
        options = load(Path(paths[0]) if paths else Path.cwd(), Path(config_path) if config_path else None)
    except ConfigError as error:
        click.echo(f"samebits: {error}", err=True)
        sys.exit(2)
    if effect:
        options = replace(options, effects=(effect,))
    if line_length is not None:
        options = replace(options, line_length=line_length)
    if chain_order:
        options = replace(options, chain_order=chain_order, chain_order_files=())
    if samples_path:
        try:
            options = with_samples(options, Path(samples_path))
        except ConfigError as error:
            click.echo(f"samebits: {error}", err=True)
            sys.exit(2)
    return options


def _report_problems(results) -> bool:
    failed = False
    for result in results:
        for line in text.problem_lines(result):
            click.echo(line, err=True)
        failed = failed or bool(result.problems)
    return failed


def _write(data: str) -> None:
    stream = sys.stdout.buffer if hasattr(sys.stdout, "buffer") else None
    if stream is None:
        sys.stdout.write(data)
        return
    sys.stdout.flush()
    stream.write(api.encode(data))
    stream.flush()


@click.group()
@click.version_option(__version__, prog_name="samebits")
def main():
    """Rewrite Fortran and Python arithmetic so that it gives the same bits on every build.

    Exit status: 0 nothing to propose, 1 proposals (check), 2 errors.
    """


@main.command()
@_rewrite_options
@click.option("--format", "output_format", type=click.Choice(["text", "json"]), default="text",
              help="text: one line per proposal and finding; json: one document for editors.")
def check(output_format, **settings):
    """List proposals as file:line:col: rule: effect: reason (exit 1 if any)."""
    results, failed = _rewrite(**settings)
    if output_format == "json":
        _write(json_report.report(results) + "\n")
    else:
        lines = []
        for result in results:
            lines.extend(text.check_lines(result))
        if lines:
            _write("\n".join(lines) + "\n")
    proposals = sum(len(r.edits) for r in results)
    sys.exit(2 if failed else (1 if proposals else 0))


@main.command()
@_rewrite_options
def diff(**settings):
    """Print the proposals as a unified diff (for git apply / patch -p1)."""
    results, failed = _rewrite(**settings)
    _write("".join(diff_report.result_diff(r) for r in results if r.changed))
    sys.exit(2 if failed else 0)


@main.command()
@_rewrite_options
def apply(**settings):
    """Rewrite the files in place (atomically; files with errors stay untouched)."""
    results, failed = _rewrite(**settings)
    for result in results:
        if not result.changed:
            continue
        try:
            api.write_result(result)
        except OSError as error:
            click.echo(f"{result.path}: not written: {error}", err=True)
            failed = True
            continue
        answer_changing = sum(1 for e in result.edits if e.effect == "answer-changing")
        note = f" ({answer_changing} ANSWER-CHANGING)" if answer_changing else ""
        click.echo(f"{text.shown(result.path)}: {len(result.edits)} edit(s) applied{note}", err=True)
    sys.exit(2 if failed else 0)


SEVERITIES = ("note", "warning", "error")


@main.command()
@_paths
@_config
@click.option("--format", "output_format", type=click.Choice(["text", "json"]), default="text",
              help="text: one line per finding; json: one document for editors.")
@click.option("--severity", "lowest", type=click.Choice(SEVERITIES), default="note",
              help="Show findings of this severity and above (default: note, all of them).")
def audit(paths, config_path, output_format, lowest):
    """What parentheses cannot pin: libm and BLAS calls, FMA-prone shapes, and the build files'
    compiler options, as file:line:col: rule: severity: message (exit 1 if any is shown)."""
    options = _options(paths, None, config_path, None)
    options = replace(options, rules=("audit",))
    results = api.rewrite_paths(list(paths), options)
    failed = _report_problems(results)
    shown_from = SEVERITIES.index(lowest)
    results = [replace(r, edits=(), findings=tuple(f for f in r.findings if f.rule in ("audit", "build")
                                                   and SEVERITIES.index(f.severity) >= shown_from))
               for r in results]
    if output_format == "json":
        _write(json_report.report(results) + "\n")
    else:
        lines = [line for result in results for line in text.check_lines(result)]
        if lines:
            _write("\n".join(lines) + "\n")
    sys.exit(2 if failed else (1 if any(r.findings for r in results) else 0))


@main.group()
def runtime():
    """Write out the runtime that rewritten code calls."""


@runtime.command("fortran")
@click.option("--out", "out_dir", required=True, type=click.Path(file_okay=False),
              help="Directory to write samebits_runtime.f90 into (created if missing).")
def runtime_fortran(out_dir):
    """Write the Fortran runtime module samebits_runtime.f90 (compile it without fast-math flags)."""
    try:
        written = api.write_runtime("fortran", Path(out_dir))
    except OSError as error:
        click.echo(f"samebits: {out_dir}: {error}", err=True)
        sys.exit(2)
    click.echo(str(written))


if __name__ == "__main__":  # pragma: no cover
    main()
