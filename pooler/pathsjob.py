"""The simulated-design job: paths (given, from a paths file, or pooled from a sheet) ->
one design per scenario -> sample size (or power at one n) by simulation -> tables,
JSON document and files.

One implementation behind two commands: ``pooler paths`` and ``pooler run SHEET --design
<a simulated design>`` both parse their options and call :func:`paths_job`; neither
computes anything itself.
"""
from __future__ import annotations

from dataclasses import dataclass, field
from typing import Callable

from pooler._results import to_jsonable
from pooler.errors import OptionError

SOBEL_NOTE = ("Sobel's test is shown for comparison only: it is low-powered "
              "(MacKinnon et al. 2002); plan with joint, monte-carlo or bootstrap.")


@dataclass(frozen=True)
class PathsJob:
    """What :func:`paths_job` computed.

    Attributes
    ----------
    design_name : str
    scenarios : dict
        Scenario label -> design ("" when there is one unnamed scenario).
    results : tuple
        :class:`~pooler.planning.simdesign.SampleSizeResult` per scenario (a search), or
        :class:`~pooler.planning.simdesign.PowerResult` per scenario (at ``fixed_n``).
    fixed_n : int or None
    options : dict
        The settings that reproduce the job (recorded in results.json).
    methods : str
        How the sample sizes were found ('' at a fixed n); the whole methods paragraph,
        with the pooling of the paths, is :func:`pooler.output.pathsreport.methods_text`.
    sheet : pooler.reading.pathsheet.PathSheet or None
        Every path's pooling, when the paths came from a sheet.
    note : str
        A note printed under the table (Sobel's test is for comparison only).
    warnings : tuple of str
        The conversion warnings of the sheet's rows.
    command : str
        The command line that repeats the job ('' when not run from the command line).
    """

    design_name: str
    scenarios: dict
    results: tuple
    fixed_n: int | None
    options: dict
    methods: str
    sheet: object = None
    note: str = ""
    warnings: tuple = field(default=())
    command: str = ""

    def to_dict(self) -> dict:
        """The JSON document: ``pooler.paths/1`` (a search) or ``pooler.paths-power/1``."""
        if self.fixed_n is not None:
            doc = {"schema": "pooler.paths-power/1",
                   "scenarios": [dict(r.to_dict(), scenario=lab)
                                 for lab, r in zip(self.scenarios, self.results)],
                   "options": self.options}
        else:
            from pooler.output.pathsreport import SCHEMA, methods_text
            doc = {"schema": SCHEMA, "scenarios": [r.to_dict() for r in self.results],
                   "options": self.options, "methods": methods_text(self)}
        if self.sheet is not None:
            doc["paths"] = self.sheet.to_dict()
        return to_jsonable(doc)

    def blocks(self) -> list:
        """The report as blocks (:func:`pooler.output.pathsreport.build_blocks`)."""
        from pooler.output.pathsreport import build_blocks
        return build_blocks(self)

    def text(self) -> str:
        """The terminal text: the report's blocks not marked ``detail`` (every path's
        pooling from a sheet, the planning table or the power at the fixed n of each
        scenario, the caution)."""
        from pooler.output.pathsreport import summary_text
        return summary_text(self)

    def files(self, fmt: str = "png") -> dict:
        """Every output file as name -> bytes: results.json, report.md, report.html, a
        power-curve figure per scenario and, from a sheet, the path diagram (at a fixed n:
        results.json, report.md and report.html)."""
        from pooler.output.pathsreport import render
        return render(self, fmt)

    def _repr_html_(self) -> str:
        """A notebook shows the report's blocks (without the figures)."""
        from pooler.output.blocks import html_fragment
        return html_fragment(self.blocks())


def _check_sheet_settings(settings: dict) -> None:
    """Design settings that a sheet's pooled correlations already determine are refused."""
    if settings.get("mediator_r"):
        raise OptionError("`mediator_r` does not apply with a sheet: the mediators' "
                          "residual correlation follows from their correlation (rows "
                          "for M1-M2, or the M1-M2 pair given as an option)")
    if any(settings.get(k, 1.0) != 1.0 for k in ("x_reliability", "z_reliability")):
        raise OptionError("`x_reliability` and `z_reliability` do not apply with a sheet: "
                          "the pooled correlations are observed-score values, already "
                          "attenuated by the earlier studies' measurement error; plan "
                          "with them as they are (or give the paths as options)")


def scenarios_from_paths(design_name: str, given: dict, *, paths_file=None,
                         as_correlations: bool = False, settings: dict | None = None,
                         hints: dict | None = None) -> dict:
    """The designs to plan, by scenario label, from path values given directly (``given``:
    path -> value), and optionally a paths file of scenarios (values, or correlations with
    ``as_correlations``)."""
    from pooler.planning import simdesign as sd
    settings = dict(settings or {})
    if as_correlations:
        if not paths_file:
            raise OptionError("`as_correlations` reads the correlations from `paths_file`")
        return {label: sd.design_from_correlations(design_name, values)
                for label, values in sd.read_paths_file(paths_file).items()}
    if paths_file:
        scenarios = {}
        for label, values in sd.read_paths_file(paths_file).items():
            both = sorted(set(values) & set(given))
            if both:
                raise OptionError(f"{', '.join(both)} is given both in {paths_file} "
                                  f"(scenario {label}) and as an option; give it once")
            scenarios[label] = sd.design_from_paths(design_name, {**given, **values},
                                                    hints=hints, **settings)
        return scenarios
    return {"": sd.design_from_paths(design_name, given, hints=hints, **settings)}


def paths_job(design_name: str, *, sheet=None, given: dict | None = None,
              option_names: dict | None = None, paths_file=None, as_correlations: bool = False,
              settings: dict | None = None, hints: dict | None = None, test: str | None = None,
              fixed_n: int | None = None, powers=(0.8, 0.9, 0.95), alpha: float = 0.05,
              reps: int | None = None, draws: int = 1000, resamples: int = 1000,
              seed: int = 2026, workers: int = 1, scheduler=None,
              progress: Callable | None = None, estimator: str = "reml",
              interval: str = "hksj", adjuster: str = "default", safeguard_level: float = 0.6,
              sample_r: float = 0.5, option_hints: bool = True, command: str = "") -> PathsJob:
    """Plan a simulated design (mediation or moderation).

    With ``sheet``, each pair of the model is pooled from its rows
    (:func:`pooler.reading.pathsheet.pool_paths`, with the analysis options ``estimator`` ...
    ``sample_r``) and ``given`` holds the correlations of pairs without rows; otherwise
    ``given`` holds the standardized paths (and ``paths_file`` scenarios of them);
    ``option_hints`` lets a missing pair's message name ``pooler paths``' own options;
    ``command`` is the command line that repeats the job, for the report. Each
    scenario is then searched for the n reaching ``powers``
    (:func:`pooler.planning.simdesign.plan_paths`), or simulated at ``fixed_n``
    (:func:`pooler.planning.simdesign.simulate_power`).

    Returns
    -------
    PathsJob
    """
    from pooler.planning import simdesign as sd
    # validation
    if design_name not in sd.DESIGNS:
        raise OptionError(f"`design` must be one of {', '.join(sd.DESIGNS)}, "
                          f"not {design_name!r}")
    settings = dict(settings or {})
    given = dict(given or {})
    ps = None
    if sheet is not None:
        from pooler.reading.pathsheet import pool_paths
        if paths_file or as_correlations:
            raise OptionError("give the paths either in a sheet or in `paths_file`, not both")
        _check_sheet_settings(settings)
        ps = pool_paths(sheet, design_name, given, option_names=option_names,
                        estimator=estimator, interval=interval, adjuster=adjuster,
                        safeguard_level=safeguard_level, sample_r=sample_r,
                        binary_moderator=bool(settings.get("binary_moderator")),
                        option_hints=option_hints)
        scenarios = dict(ps.designs)
    else:
        scenarios = scenarios_from_paths(design_name, given, paths_file=paths_file,
                                         as_correlations=as_correlations, settings=settings,
                                         hints=hints)
    common = dict(test=test, alpha=alpha, seed=seed, draws=draws, resamples=resamples,
                  progress=progress)
    note = SOBEL_NOTE if test == "sobel" else ""
    warnings = ps.warnings if ps is not None else ()
    def settings(results, used_reps):
        return {"design": design_name, "test": results[0].test, "alpha": alpha,
                "reps": used_reps, "draws": draws, "resamples": resamples, "seed": seed,
                "paths_file": str(paths_file) if paths_file else None,
                "sheet": str(sheet) if sheet is not None else None}
    if fixed_n is not None:
        res = tuple(sd.simulate_power(d, fixed_n, reps=reps, stream=i, workers=workers,
                                      scheduler=scheduler, **common)
                    for i, d in enumerate(scenarios.values()))
        options = {**settings(res, res[0].estimates[0].reps), "n": fixed_n}
        return PathsJob(design_name, scenarios, res, fixed_n, options, "", ps, note, warnings,
                        command)
    search_reps = reps or (200 if test == "bootstrap" else 1000)
    results = sd.plan_paths(scenarios, powers=tuple(powers or (0.8, 0.9, 0.95)),
                            reps=search_reps, workers=workers, scheduler=scheduler, **common)
    from pooler.output.pathsreport import methods_paragraph
    methods = methods_paragraph(results, search_reps, draws, resamples)
    return PathsJob(design_name, scenarios, results, None, settings(results, search_reps),
                    methods, ps, note, warnings, command)


def paths_stress(design_name: str, sheet, *, given: dict | None = None,
                 option_names: dict | None = None, settings: dict | None = None,
                 literatures: int = 40, selection=(1.0, 0.2), seed: int = 2026,
                 workers: int = 1, scheduler=None, progress: Callable | None = None,
                 option_hints: bool = True):
    """Pool ``sheet``'s paths as :func:`paths_job` does, then stress-check that route
    (:func:`pooler.planning.pathstress.stress_paths`): literatures like the sheet's, simulated from
    its realistic correlations, each planned through the same stages."""
    from pooler.reading.pathsheet import pool_paths
    from pooler.planning.pathstress import stress_paths
    settings = dict(settings or {})
    _check_sheet_settings(settings)
    ps = pool_paths(sheet, design_name, dict(given or {}), option_names=option_names,
                    binary_moderator=bool(settings.get("binary_moderator")),
                    option_hints=option_hints)
    return stress_paths(ps, literatures=literatures, selection=selection, seed=seed,
                        workers=workers, scheduler=scheduler, progress=progress)
