"""The ``pooler`` command line: parse, call the stages, print. No statistics here.

Every :class:`pooler.errors.PoolerError` becomes one line on stderr and exit code 2
(see :class:`_Group`); nothing else is caught, so a real bug still shows its traceback.
"""
from __future__ import annotations

import json
import sys

import click

from .errors import PoolerError


class _Group(click.Group):
    """Turns every PoolerError raised by a command into a clean message and exit 2."""

    def invoke(self, ctx):
        try:
            return super().invoke(ctx)
        except PoolerError as exc:
            click.echo(f"pooler: error: {exc}", err=True)
            ctx.exit(2)


def _metric_option(f):
    return click.option("--metric", type=click.Choice(["d", "r"]), default="d", show_default=True,
                        help="Common metric: d = Hedges' g, r = Fisher's z of the correlation.")(f)


def _within_r_option(f):
    return click.option("--within-r", type=float, default=0.5, show_default=True,
                        help="Correlation between repeated measures for within-subject rows "
                             "that do not give one (an assumption, printed).")(f)


def _sample_r_option(f):
    return click.option("--sample-r", type=float, default=0.5, show_default=True,
                        help="Assumed correlation between outcomes of rows that share a "
                             "'sample' (they are combined into one effect).")(f)


def _json_option(f):
    return click.option("--json", "as_json", is_flag=True,
                        help="Print the JSON document instead of tables.")(f)


def _conversion_options(f):
    for deco in reversed((_metric_option, _within_r_option, _sample_r_option)):
        f = deco(f)
    return f


def _sheet_argument(f):
    return click.argument("sheet", type=click.Path(dir_okay=False))(f)


def _echo_warnings(items):
    for w in items:
        click.echo(f"pooler: warning: {w}", err=True)


def _print_json(doc: dict) -> None:
    click.echo(json.dumps(doc, indent=2, ensure_ascii=False, allow_nan=False))


def _load(sheet_path, metric, within_r, sample_r):
    from .effects import convert
    from .sheet import read_sheet
    sheet = read_sheet(sheet_path)
    return sheet, convert(sheet, metric, within_r=within_r, sample_r=sample_r)


@click.group(cls=_Group, context_settings={"help_option_names": ["-h", "--help"],
                                           "max_content_width": 100})
@click.version_option(package_name="pooler", prog_name="pooler")
def main():
    """pooler: turn the statistics prior studies reported into a defensible sample size.

    Collect one row per reported result in a sheet (`pooler template sheet.csv` writes a
    starting point), then convert the rows to one metric.

    \b
    Example:
      pooler template my_literature.csv
      pooler convert my_literature.csv
    """


@main.command()
@_sheet_argument
@_conversion_options
@_json_option
def convert(sheet, metric, within_r, sample_r, as_json):
    """Convert every row of SHEET to one metric with its variance.

    Prints one line per sheet row (used or excluded, with the reason), the assumptions
    made, and the independent samples that will be pooled.

    \b
    Example:
      pooler convert demo_literature/break_and_proofreading.csv
      pooler convert my_literature.csv --metric r --json
    """
    from .report import effects_text
    s, eff = _load(sheet, metric, within_r, sample_r)
    _echo_warnings(eff.warnings)
    if as_json:
        _print_json(eff.to_dict())
    else:
        click.echo(effects_text(eff, s))


@main.command()
@click.argument("path", type=click.Path(dir_okay=False))
@click.option("--force", is_flag=True, help="Overwrite PATH if it exists.")
def template(path, force):
    """Write a starting sheet to PATH (.csv, .tsv or .xlsx) with a column guide.

    The sheet has one invented example row per kind of reported statistic; replace them
    with your literature.

    \b
    Example:
      pooler template my_literature.xlsx
    """
    from pathlib import Path
    from .errors import OptionError
    from .template import write_template
    if Path(path).exists() and not force:
        raise OptionError(f"{path} exists; choose another name or add --force")
    for p in write_template(path):
        click.echo(f"wrote {p}")


if __name__ == "__main__":  # pragma: no cover
    sys.exit(main())
