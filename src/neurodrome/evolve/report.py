"""Experiment reports: compare treatments over repeated runs.

:func:`make_report` reads run directories (:mod:`neurodrome.evolve.rundir`), groups them by
treatment and writes into the report directory:

- ``best_so_far.png``: median best-so-far fitness per treatment over generations, with
  the inter-quartile range across runs as a band (common practice, Arcuri & Briand 2011);
- ``final_values.csv`` and a Markdown copy in ``summary.md``: final best-so-far fitness
  per treatment (runs, median, quartiles, min, max, mean);
- ``runs.csv``: the final value of every run;
- ``comparisons.csv``: two-sided Mann-Whitney U, p and Vargha-Delaney A12 for each pair of
  treatments at the final generation and at each chosen checkpoint;
- ``summary.md``: all of the above in one page.
"""

from __future__ import annotations

import csv
import io
from dataclasses import dataclass, field
from pathlib import Path
from typing import Iterable

import numpy as np

from .._version import __version__
from ..errors import MissingExtraError, Problem, RunFileError
from ..jsonio import write_atomic
from .rundir import Run, find_run_dirs, read_run
from .stats import EXACT_MAX_TOTAL, MannWhitney, a12_magnitude, curve_bands, mann_whitney_u

PLOT_NAME = "best_so_far.png"
FINAL_CSV = "final_values.csv"
RUNS_CSV = "runs.csv"
COMPARISONS_CSV = "comparisons.csv"
SUMMARY_NAME = "summary.md"

# Okabe & Ito's colour-universal-design set (published, made to stay distinct under the
# common colour-vision deficiencies), in an order of our choosing; yellow is left out
# because it vanishes on white. Line styles change too, so print in grey still works.
COLOURS = ("#0072B2", "#D55E00", "#009E73", "#CC79A7", "#E69F00", "#56B4E9", "#000000")
LINE_STYLES = ("-", "--", "-.", ":")


@dataclass(frozen=True)
class TreatmentFinal:
    """Final best-so-far fitness of one treatment across its runs."""

    treatment: str
    runs: int
    median: float
    q1: float
    q3: float
    minimum: float
    maximum: float
    mean: float


@dataclass(frozen=True)
class Comparison:
    """Mann-Whitney U test of treatment ``first`` against ``second`` at one generation."""

    generation: int
    first: str
    second: str
    test: MannWhitney

    @property
    def magnitude(self) -> str:
        return a12_magnitude(self.test.a12)


@dataclass
class Report:
    """What :func:`make_report` computed and wrote."""

    out_dir: Path
    generations: int
    treatments: dict[str, list[Run]]
    finals: list[TreatmentFinal]
    comparisons: list[Comparison]
    checkpoints: list[int]
    files: dict[str, Path] = field(default_factory=dict)
    #: a study cut short: the generations its runs were planned to reach (else None)
    planned: int | None = None
    #: the study's goal, when the report was made on a study directory that sets one:
    #: {group: [(run directory, reached, detail), ...]}
    goals: dict[str, list[tuple[Path, bool, str]]] | None = None
    goal_kind: str | None = None


def _import_matplotlib():
    try:
        import matplotlib  # noqa: F401
        from matplotlib.figure import Figure
        from matplotlib.ticker import MaxNLocator
    except ImportError:
        raise MissingExtraError("plots", "matplotlib", "The report plot") from None
    return Figure, MaxNLocator


def load_runs(run_dirs: Iterable[str | Path]) -> dict[str, list[Run]]:
    """Read runs and group them by study arm or treatment (in order of first appearance).

    Refuses no runs, the same directory twice, a repeated seed within a group, runs on
    different worlds, and runs of different lengths, each with a :class:`RunFileError`,
    except that the runs of one study (``neurodrome study``, still running or stopped) are
    cut to the generations every one of them has reached.
    """
    return _load_runs(run_dirs)[0]


def _load_runs(run_dirs: Iterable[str | Path]) -> tuple[dict[str, list[Run]], int | None]:
    """(groups, planned generations of a study cut short or None)."""
    paths = find_run_dirs(list(run_dirs))
    if not paths:
        raise RunFileError(Problem("report", "at least one run directory", "none"))
    seen: dict[Path, Path] = {}
    for path in paths:
        key = path.resolve()
        if key in seen:
            raise RunFileError(Problem(str(path), "each run directory once", f"also given as {seen[key]}"))
        seen[key] = path
    groups: dict[str, list[Run]] = {}
    runs = [read_run(path, allow_empty=True) for path in paths]
    studies = {run.study for run in runs}
    one_study = len(studies) == 1 and None not in studies
    for run in runs:
        if run.generations == 0 and not one_study:
            read_run(run.path)  # raises the empty-log error
        group = groups.setdefault(run.group, [])
        for other in group:
            if other.header.seed == run.header.seed:
                raise RunFileError(Problem(f"{run.path}/run.json $.seed",
                                           f"a seed not used by another run of {run.group!r}",
                                           f"seed {run.header.seed}, as in {other.path}"))
        group.append(run)
    worlds: dict[str, list[Path]] = {}
    for run in runs:
        worlds.setdefault(run.world_key, []).append(run.path)
    if len(worlds) > 1:
        parts = [f"{key} ({len(paths_of)} runs, e.g. {paths_of[0]})" for key, paths_of in worlds.items()]
        raise RunFileError(Problem("report", "runs evolved on one world (a comparison across worlds compares "
                                   "tasks, not treatments)", "; ".join(parts)))
    planned = None
    if one_study:
        reached = min(run.generations for run in runs)
        longest = max(run.generations for run in runs)
        planned = max(int(run.header.config.get("generations", longest)) for run in runs)
        if reached == 0:
            slow = next(run.path for run in runs if run.generations == 0)
            raise RunFileError(Problem("report", "a study in which every run has finished a generation",
                                       f"{slow} has none yet"))
        if reached < planned:
            groups = {name: [run.head(reached) for run in group] for name, group in groups.items()}
            return groups, planned
        return groups, None
    by_length: dict[int, list[Path]] = {}
    for group in groups.values():
        for run in group:
            by_length.setdefault(run.generations, []).append(run.path)
    if len(by_length) > 1:
        ordered = sorted(by_length.items(), key=lambda item: -len(item[1]))
        parts = [f"{len(ordered[0][1])} runs of {ordered[0][0]} generations"]
        for length, paths_of in ordered[1:]:
            names = ", ".join(str(p) for p in paths_of[:5]) + (f" and {len(paths_of) - 5} more" if len(paths_of) > 5 else "")
            parts.append(f"{length} generations in {names}")
        raise RunFileError(Problem("report", "runs with the same number of generations", "; ".join(parts)))
    return groups, None


def _checkpoints(checkpoints: Iterable[int] | None, generations: int) -> list[int]:
    chosen = {generations - 1}
    for value in checkpoints or ():
        if isinstance(value, bool) or not isinstance(value, (int, np.integer)) or not 0 <= value < generations:
            raise RunFileError(Problem("checkpoints", f"generation numbers from 0 to {generations - 1}", repr(value)))
        chosen.add(int(value))
    return sorted(chosen)


def _final(treatment: str, values: np.ndarray) -> TreatmentFinal:
    q1, med, q3 = np.percentile(values, [25.0, 50.0, 75.0])
    return TreatmentFinal(treatment=treatment, runs=int(values.size), median=float(med), q1=float(q1),
                          q3=float(q3), minimum=float(values.min()), maximum=float(values.max()),
                          mean=float(values.mean()))


def make_report(run_dirs: Iterable[str | Path], out_dir: str | Path,
                checkpoints: Iterable[int] | None = None) -> Report:
    """Read ``run_dirs``, compare treatments and write the report files into ``out_dir``.

    ``checkpoints`` are extra generation numbers (0-based, as in ``log.jsonl``) at which
    treatments are compared besides the final generation.
    """
    matplotlib_parts = _import_matplotlib()
    run_dirs = list(run_dirs)
    groups, planned = _load_runs(run_dirs)
    groups = _in_study_order(groups, run_dirs)
    generations = next(iter(groups.values()))[0].generations
    chosen = _checkpoints(checkpoints, generations)
    curves = {name: np.stack([run.best_so_far for run in runs]) for name, runs in groups.items()}
    finals = [_final(name, curve[:, -1]) for name, curve in curves.items()]
    names = list(groups)
    comparisons = [Comparison(g, a, b, mann_whitney_u(curves[a][:, g], curves[b][:, g]))
                   for g in chosen for i, a in enumerate(names) for b in names[i + 1:]]
    out = Path(out_dir)
    if out.exists() and not out.is_dir():
        raise RunFileError(Problem(str(out), "a report directory", "an existing file"))
    report = Report(out_dir=out, generations=generations, treatments=groups, finals=finals,
                    comparisons=comparisons, checkpoints=chosen, planned=planned)
    _check_goals(report, run_dirs)
    report.files["plot"] = _write(out / PLOT_NAME, _plot_png(matplotlib_parts, curves, chosen))
    report.files["final_values"] = _write(out / FINAL_CSV, _final_csv(finals))
    report.files["runs"] = _write(out / RUNS_CSV, _runs_csv(groups, report.goals))
    report.files["comparisons"] = _write(out / COMPARISONS_CSV, _comparisons_csv(comparisons))
    report.files["summary"] = _write(out / SUMMARY_NAME, _summary_md(report))
    return report


def _in_study_order(groups: dict[str, list[Run]], run_dirs: list[str | Path]) -> dict[str, list[Run]]:
    """The arms of a study directory in the order of its study file."""
    from .studyfile import STUDY_COPY, prepare_study_dir

    folders = [Path(p) for p in run_dirs if (Path(p) / STUDY_COPY).is_file()]
    if len(folders) != 1:
        return groups
    order = [arm.name for arm in prepare_study_dir(None, folders[0], resume=True).spec.arms]
    return dict(sorted(groups.items(), key=lambda item: order.index(item[0]) if item[0] in order else len(order)))


def _check_goals(report: Report, run_dirs: list[str | Path]) -> None:
    """With a study directory among ``run_dirs`` whose study sets a goal, check every run."""
    from .goals import check_goal
    from .studyfile import STUDY_COPY, prepare_study_dir

    folders = [Path(p) for p in run_dirs if (Path(p) / STUDY_COPY).is_file()]
    if len(folders) != 1:
        return
    study = prepare_study_dir(None, folders[0], resume=True)
    goal = study.spec.goal
    if goal is None:
        return
    runs = [run for group in report.treatments.values() for run in group]
    results = check_goal(goal, study.source.parent, [run.path for run in runs], [run.header.world for run in runs])
    found = {run.path: r for run, r in zip(runs, results)}
    report.goal_kind = goal.kind
    report.goals = {name: [(run.path, found[run.path].reached, found[run.path].detail) for run in group]
                    for name, group in report.treatments.items()}


def _write(path: Path, data: bytes | str) -> Path:
    write_atomic(path, data)
    return path


def _csv(rows: list[list[object]]) -> str:
    buf = io.StringIO()
    csv.writer(buf, lineterminator="\n").writerows(rows)
    return buf.getvalue()


def _final_csv(finals: list[TreatmentFinal]) -> str:
    rows: list[list[object]] = [["treatment", "runs", "median", "q1", "q3", "min", "max", "mean"]]
    rows += [[f.treatment, f.runs, repr(f.median), repr(f.q1), repr(f.q3), repr(f.minimum), repr(f.maximum),
              repr(f.mean)] for f in finals]
    return _csv(rows)


def _runs_csv(groups: dict[str, list[Run]], goals: dict[str, list[tuple[Path, bool, str]]] | None = None) -> str:
    """One row per run; ``treatment`` is the group (a study's arm name), ``network`` the
    network kind, and with a goal ``goal_reached`` and ``goal_measured``."""
    head: list[object] = ["treatment", "seed", "run_dir", "generations", "final_best_so_far", "network"]
    reached = {path: (ok, detail) for rows in (goals or {}).values() for path, ok, detail in rows}
    rows: list[list[object]] = [head + (["goal_reached", "goal_measured"] if goals is not None else [])]
    for name, runs in groups.items():
        for run in runs:
            row: list[object] = [name, run.header.seed, str(run.path), run.generations,
                                 repr(float(run.best_so_far[-1])), run.treatment]
            if goals is not None:
                ok, detail = reached[run.path]
                row += ["yes" if ok else "no", detail]
            rows.append(row)
    return _csv(rows)


def _comparisons_csv(comparisons: list[Comparison]) -> str:
    rows: list[list[object]] = [["generation", "first", "second", "n_first", "n_second", "u", "p", "method",
                                 "a12", "effect"]]
    rows += [[c.generation, c.first, c.second, c.test.n1, c.test.n2, repr(c.test.u), repr(c.test.p),
              c.test.method, repr(c.test.a12), c.magnitude] for c in comparisons]
    return _csv(rows)


def _num(value: float) -> str:
    return f"{value:.6g}"


def _md_cell(text: str) -> str:
    return text.replace("|", "\\|")


def _summary_md(report: Report) -> str:
    runs_total = sum(len(r) for r in report.treatments.values())
    last = report.generations - 1
    lines = [
        "# Experiment report",
        "",
        f"{runs_total} runs in {len(report.treatments)} treatment(s), {report.generations} generations each "
        f"(generations 0 to {last}). Written by neurodrome {__version__}.",
        "",
        *([f"**The study is still running or was stopped:** every run has reached generation {last}, of "
           f"{report.planned} planned; this page shows generations 0 to {last}.", ""] if report.planned else []),
        f"![Median best-so-far fitness with inter-quartile bands]({PLOT_NAME})",
        "",
        "## Runs",
        "",
        "| treatment | runs | seeds | world |",
        "| --- | ---: | --- | --- |",
    ]
    for name, runs in report.treatments.items():
        seeds = ", ".join(str(r.header.seed) for r in runs)
        worlds = ", ".join(sorted({r.header.world for r in runs}))
        lines.append(f"| {_md_cell(name)} | {len(runs)} | {seeds} | {_md_cell(worlds)} |")
    worlds_all = {r.header.world for runs in report.treatments.values() for r in runs}
    if len(worlds_all) > 1:
        lines += ["", "**Note:** the runs name different worlds; compare them only if that is intended."]
    lines += [
        "",
        f"## Final best-so-far fitness (generation {last})",
        "",
        "| treatment | runs | median | Q1 | Q3 | min | max | mean |",
        "| --- | ---: | ---: | ---: | ---: | ---: | ---: | ---: |",
    ]
    for f in report.finals:
        lines.append(f"| {_md_cell(f.treatment)} | {f.runs} | {_num(f.median)} | {_num(f.q1)} | {_num(f.q3)} | "
                     f"{_num(f.minimum)} | {_num(f.maximum)} | {_num(f.mean)} |")
    if report.goals is not None:
        what = {"maximum": "the champion scores the task's maximum when re-evaluated",
                "switching": "reward-driven switching: the champion beats the same-arm plateau on the relocating "
                             "world and keeps to one arm in the static world"}[report.goal_kind]
        lines += ["", f"## Runs that reached the goal ({report.goal_kind})", "", f"Goal: {what}.", "",
                  "| arm | reached | of runs |", "| --- | ---: | ---: |"]
        for name, rows in report.goals.items():
            lines.append(f"| {_md_cell(name)} | {sum(r for _, r, _ in rows)} | {len(rows)} |")
        lines += ["", "| run | reached | measured |", "| --- | --- | --- |"]
        for rows in report.goals.values():
            for path, reached, detail in rows:
                lines.append(f"| {_md_cell(path.name)} | {'yes' if reached else 'no'} | {_md_cell(detail)} |")
    lines += ["", "## Comparisons", ""]
    if not report.comparisons:
        lines.append("Only one treatment: nothing to compare.")
    else:
        lines += [
            "Two-sided Mann-Whitney U test on best-so-far fitness (Arcuri & Briand 2011). U counts the pairs of "
            "runs in which the first treatment is ahead (ties count one half); A12 = U / (n1 n2) is the "
            "probability that a run of the first treatment beats one of the second: above 0.5 favours the "
            "first. Effect sizes follow Vargha & Delaney's thresholds (0.56, 0.64, 0.71). The test is exact "
            f"when there are no ties and n1 + n2 <= {EXACT_MAX_TOTAL}, otherwise the normal approximation with "
            "tie and continuity corrections (the column test says which). p-values are not adjusted for multiple comparisons.",
            "",
            "| generation | first | second | U | p | test | A12 | effect |",
            "| ---: | --- | --- | ---: | ---: | --- | ---: | --- |",
        ]
        for c in report.comparisons:
            lines.append(f"| {c.generation} | {_md_cell(c.first)} | {_md_cell(c.second)} | {_num(c.test.u)} | "
                         f"{c.test.p:.4g} | {c.test.method} | {c.test.a12:.4f} | {c.magnitude} |")
    lines += ["", "## Files", "",
              f"- `{PLOT_NAME}`: the plot above",
              f"- `{FINAL_CSV}`: the final-values table",
              f"- `{RUNS_CSV}`: the final value of every run",
              f"- `{COMPARISONS_CSV}`: every comparison, full precision", ""]
    return "\n".join(lines)


def _plot_png(matplotlib_parts, curves: dict[str, np.ndarray], checkpoints: list[int]) -> bytes:
    """Render the best-so-far plot; returns PNG bytes (no pyplot, so no global state)."""
    figure_class, MaxNLocator = matplotlib_parts
    fig = figure_class(figsize=(8.0, 5.0), dpi=150, layout="constrained")
    ax = fig.subplots()
    generations = next(iter(curves.values())).shape[1]
    gens = np.arange(generations)
    for index, (name, curve) in enumerate(curves.items()):
        colour = COLOURS[index % len(COLOURS)]
        style = LINE_STYLES[(index // len(COLOURS) + index) % len(LINE_STYLES)]
        bands = curve_bands(curve)
        label = f"{name} ({curve.shape[0]} runs)"
        if generations == 1:
            # a band over one generation is invisible: show the quartiles as an error bar
            offset = (index - (len(curves) - 1) / 2) * 0.08
            ax.errorbar(gens + offset, bands.median, yerr=[bands.median - bands.q1, bands.q3 - bands.median],
                        color=colour, fmt="o", markersize=7, capsize=6, linewidth=2, label=label)
            continue
        ax.fill_between(gens, bands.q1, bands.q3, color=colour, alpha=0.22, linewidth=0)
        ax.plot(gens, bands.median, color=colour, linestyle=style, linewidth=2.2, label=label)
    for position, g in enumerate(checkpoints[:-1]):
        ax.axvline(g, color="0.45", linewidth=1.0, linestyle=":", zorder=0,
                   label="checkpoint (tested)" if position == 0 else None)
    ax.set_xlabel("generation", fontsize=12)
    ax.set_ylabel("best-so-far fitness", fontsize=12)
    ax.set_title("Median best-so-far fitness across runs; bands: inter-quartile range", fontsize=12)
    ax.tick_params(labelsize=11)
    ax.grid(True, color="0.88", linewidth=0.8)
    ax.set_axisbelow(True)
    ax.set_xlim(*((-0.5, 0.5) if generations == 1 else (0, generations - 1)))
    if generations == 1:
        ax.set_xticks([0])
    else:
        ax.xaxis.set_major_locator(MaxNLocator(integer=True))
    ax.legend(fontsize=10.5, loc="lower right", frameon=True,
              framealpha=0.92)
    buf = io.BytesIO()
    fig.savefig(buf, format="png")
    return buf.getvalue()
