"""Files of a full run: rendered in memory first, then written atomically.

Nothing is written until every file has been rendered, so a failure leaves no partial
output; each file is written to a temporary name in the target folder and renamed.
"""
from __future__ import annotations

import csv
import io
import json
import os
import tempfile
from pathlib import Path

from pooler._results import csv_safe
from pooler.errors import OptionError

FIGURES = ("forest", "funnel", "ladder", "power")


def effects_csv(effects) -> str:
    buf = io.StringIO()
    w = csv.writer(buf, lineterminator="\n")
    extra = list(dict.fromkeys(k for r in effects.rows for k in r.extra))
    w.writerow(["row", "study", "stat", "design", "effect", "variance", "se", "ci_low",
                "ci_high", "n_total", "n1", "n2", "sample", "status", "reason", "notes",
                "reported"] + extra)
    for r in effects.rows:
        ci = r.ci()
        w.writerow([r.row, csv_safe(r.study), r.stat, r.design,
                    *[("" if x is None else repr(float(x))) for x in
                      (r.effect, r.variance, r.se, ci.low if ci else None,
                       ci.high if ci else None, r.n_total, r.n1, r.n2)],
                    csv_safe(r.sample or ""), r.status, csv_safe(r.reason),
                    csv_safe("; ".join(r.notes)), csv_safe(r.reported or "")] + [csv_safe(r.extra.get(k, "")) for k in extra])
    return buf.getvalue()


def figure_files(figs: dict, fmt: str) -> tuple[dict[str, bytes], dict[str, bytes]]:
    """Figures (stem -> matplotlib Figure) as files ``<stem>.<fmt>`` -> bytes, and as PNG
    (stem -> bytes) for the HTML report to embed."""
    from pooler.output import plots
    if fmt not in ("png", "svg", "pdf"):
        raise OptionError(f"--format must be png, svg or pdf, not {fmt!r}")
    files: dict[str, bytes] = {}
    png: dict[str, bytes] = {}
    for name, fig in figs.items():
        buf = io.BytesIO()
        plots.save(fig, buf, fmt)
        files[f"{name}.{fmt}"] = buf.getvalue()
        if fmt == "png":
            png[name] = files[f"{name}.{fmt}"]
        else:
            b2 = io.BytesIO()
            plots.save(fig, b2, "png")
            png[name] = b2.getvalue()
    return files, png


def render(run, fmt: str = "png") -> dict[str, bytes]:
    """Every output file of ``run`` as name -> bytes."""
    from pooler.output import plots
    from pooler.output.document import build_blocks, to_html, to_markdown
    from pooler.output.report import plan_csv
    a = run.analysis
    figs = {"forest": plots.forest_plot(a.pooled, a.scenarios),
            "funnel": plots.funnel_plot(a.pooled, a.bias),
            "ladder": plots.estimate_ladder(a.pooled, a.bias, a.scenarios),
            "power": plots.power_curves(run.plan)}
    files, png = figure_files(figs, fmt)
    blocks = build_blocks(run)
    files["report.md"] = to_markdown(blocks, fmt).encode("utf-8")
    files["report.html"] = to_html(blocks, png, "pooler report").encode("utf-8")
    files["results.json"] = (json.dumps(run.to_dict(), indent=2, ensure_ascii=False,
                                        allow_nan=False) + "\n").encode("utf-8")
    files["planning_table.csv"] = plan_csv(run.plan).encode("utf-8")
    files["effects.csv"] = effects_csv(a.effects).encode("utf-8")
    return files


#: The record of what pooler wrote into an output folder: a rerun replaces exactly these.
MANIFEST = ".written-by-pooler.json"


def _previous_files(out: Path) -> set[str] | None:
    """Names pooler wrote into ``out`` last time, or None if ``out`` is not pooler's."""
    try:
        doc = json.loads((out / MANIFEST).read_text(encoding="utf-8"))
        names = doc["files"]
    except (OSError, ValueError, KeyError, TypeError):
        return None
    if not isinstance(names, list):
        return None
    # only plain names inside the folder: a manifest can never point elsewhere
    return {n for n in names if isinstance(n, str) and n and Path(n).name == n
            and n not in (".", "..")}


def check_out(out_dir, force: bool = False) -> Path:
    """Refuse an --out that is a file, or a non-empty folder pooler did not write, unless
    ``force``. A folder pooler wrote before (it holds the manifest) is replaced by a rerun."""
    out = Path(out_dir)
    if out.exists() and not out.is_dir():
        raise OptionError(f"--out {out} is a file, not a folder")
    if (out.exists() and any(out.iterdir()) and _previous_files(out) is None
            and not force):
        raise OptionError(f"--out {out} is not empty and was not written by pooler; choose "
                          "another folder or add --force")
    return out


def write(files: dict[str, bytes], out_dir, force: bool = False) -> list[Path]:
    """Write ``files`` into ``out_dir`` atomically and replace what pooler wrote there before.

    A folder written by pooler (see :data:`MANIFEST`) is replaced as a whole: the files of the
    previous run that this run does not write again (e.g. PNGs after ``--format svg``) are
    removed; files pooler did not write are never touched. A non-empty folder that pooler did
    not write is refused without ``force``.
    """
    out = check_out(out_dir, force)
    previous = _previous_files(out) or set()
    out.mkdir(parents=True, exist_ok=True)
    written = []
    for name, data in files.items():
        written.append(_write_atomically(out, name, data))
    for name in sorted(previous - set(files)):
        stale = out / name
        if stale.is_file() and not stale.is_symlink():
            stale.unlink()
    manifest = {"written_by": "pooler", "files": sorted(files)}
    _write_atomically(out, MANIFEST, (json.dumps(manifest, indent=1) + "\n").encode("utf-8"))
    return written


def _write_atomically(out: Path, name: str, data: bytes) -> Path:
    target = out / name
    fd, tmp = tempfile.mkstemp(prefix=f".{name}.", dir=out)
    try:
        with os.fdopen(fd, "wb") as fh:
            fh.write(data)
        os.chmod(tmp, 0o666 & ~_umask())
        os.replace(tmp, target)
    except BaseException:
        if os.path.exists(tmp):
            os.unlink(tmp)
        raise
    return target


def _umask() -> int:
    mask = os.umask(0)
    os.umask(mask)
    return mask
