"""Command line: the only place that prints or exits. Exit codes: 0 ok, 1 sweep workers or
cluster failed, 2 bad input, 3 infeasible mission, 4 solver failure, 130 interrupted (Ctrl-C),
143 terminated (SIGTERM)."""

from __future__ import annotations

import contextlib
import sys
import time
from pathlib import Path

import click

from climbopt import CAUTION, __version__


@click.group()
@click.version_option(__version__, prog_name="climbopt")
def cli():
    """climbopt: how to climb -- minimum-time and minimum-fuel climb schedules."""


def main():  # console-script entry point
    cli()


# ---- climbopt check -------------------------------------------------------------------------


@cli.command("check")
@click.argument("scenario_file", metavar="SCENARIO")
@click.option("--units", "check_units", type=click.Choice(["file", "si", "us"]), default="file",
              show_default=True, help="Units of the summary: as written in the file, SI, or US (ft, kt, lb, nmi).")
def check(scenario_file: str, check_units: str):
    """Read SCENARIO, print what was understood (in the file's units), or list every problem.

    Exit code 0 when the file is valid, 2 when it is not.
    """
    from climbopt.describe import describe_scenario
    from climbopt.scenario import ScenarioError, check_solver_options, load_scenario

    try:
        scenario = load_scenario(scenario_file)
        check_solver_options(scenario)
        text = describe_scenario(scenario, units=check_units)
    except ScenarioError as exc:
        n = len(exc.problems)
        click.echo(f"error: {exc.path}: {n} problem{'s' if n != 1 else ''} found:", err=True)
        for fld, msg in exc.problems:
            click.echo(f"  {fld}: {msg}", err=True)
        raise SystemExit(2) from None
    except Exception as exc:  # never show a traceback to the user
        click.echo(f"error: {scenario_file}: could not check the scenario: {type(exc).__name__}: {exc}",
                   err=True)
        raise SystemExit(2) from None
    click.echo(text)
    for fld, msg in scenario.warnings:
        click.echo(f"warning: {fld}: {msg}")
    click.echo("")
    click.echo(f"OK: {scenario_file} is a valid scenario.")
    click.echo(f"Caution: {CAUTION}")


# ---- climbopt run / climbopt map ------------------------------------------------------------
# (run and map: solve, report, write the output folder atomically; only this module prints)

EXIT_OK, EXIT_BAD_INPUT, EXIT_INFEASIBLE, EXIT_SOLVER_FAILURE = 0, 2, 3, 4
#: Stopped by Ctrl-C (128 + SIGINT) or by SIGTERM (128 + SIGTERM), as shells report them.
EXIT_INTERRUPTED, EXIT_TERMINATED = 130, 143


def _fail(message: str, code: int) -> None:
    """Print an error (no traceback) and leave with ``code``."""
    click.echo(f"error: {message}", err=True)
    raise SystemExit(code)


def _load_for_command(scenario_file: str, solver_options: bool = False):
    """Load a scenario, turning every input problem into exit code 2 (with ``solver_options``
    the IPOPT options too, as ``check`` does, before any solving)."""
    from climbopt.scenario import ScenarioError, check_solver_options, load_scenario

    try:
        scenario = load_scenario(scenario_file)
        if solver_options:
            check_solver_options(scenario)
        return scenario
    except ScenarioError as exc:
        _fail(_problems_text(exc), EXIT_BAD_INPUT)
    except (OSError, ValueError) as exc:
        _fail(f"{scenario_file}: {exc}", EXIT_BAD_INPUT)


class _Progress:
    """Progress bars on stderr (tqdm) for the slow steps; silent when disabled.

    ``callback(label)`` returns a ``progress(message, fraction)`` callable as the solvers expect.
    """

    def __init__(self, enabled: bool):
        self.enabled = enabled
        self._bar = None
        self._label = None

    def callback(self, label: str):
        if not self.enabled:
            return None

        def progress(message: str, fraction: float | None = None):
            if self._bar is not None and self._label != label:
                self.done()
            if self._bar is None:
                self._label = label
                self._bar = _tqdm_bar(total=100, desc=label, leave=False,
                                      bar_format="{desc}: {percentage:3.0f}%|{bar}|{postfix}")
            self._bar.set_postfix_str(str(message)[:60], refresh=False)
            if fraction is not None:
                self._bar.n = int(round(100 * min(max(float(fraction), 0.0), 1.0)))
            self._bar.refresh()

        return progress

    def done(self):
        if self._bar is not None:
            self._bar.close()
            self._bar = None

    def step(self, label: str):
        """Announce one step without a fraction (e.g. writing plots)."""
        cb = self.callback(label)
        if cb:
            cb(label, None)
        return cb


def _tqdm_bar(**options):
    """A tqdm progress bar on stderr as wide as the terminal (at most 120 columns), in ASCII
    unless stderr takes UTF-8; ``options`` go to tqdm."""
    import shutil

    from tqdm import tqdm

    # a terminal reporting 0 rows/columns would hide the bar: fall back to 100 x 40
    size = shutil.get_terminal_size((100, 40))
    encoding = (getattr(sys.stderr, "encoding", "") or "").lower()
    return tqdm(file=sys.stderr, ncols=min(size.columns, 120), nrows=max(size.lines, 2),
                ascii="utf" not in encoding, **options)


def _progress_enabled(quiet: bool) -> bool:
    return (not quiet) and sys.stderr.isatty()


def _default_out(scenario_file: str, suffix: str = "") -> Path:
    return Path("out") / (Path(scenario_file).stem + suffix)


#: ``--units`` of run, map, sweep and reduce: the file's units (default), SI, US, or the crew set.
UNITS_OPTION = dict(type=click.Choice(["file", "si", "us", "crew"]), default="file",
                    show_default=True,
                    help="Units of printed and written tables and plots: as the scenario file "
                         "writes altitudes and speeds (us when in ft and kt, else si), si (m, km, "
                         "kg, m/s; speeds to fly in km/h), us (ft, kt, lb, nmi, ft/min) or crew "
                         "(ft, kt, ft/min, nmi, mass in kg or lb as the file writes it).")


def _units_for(choice: str, scenario) -> str:
    from climbopt.units import unit_system_for

    return unit_system_for(choice, getattr(scenario, "display_units", {}) or {})


def _wrapped(text: str, width: int = 100) -> str:
    """Each line of ``text`` wrapped at ``width`` characters, continuation lines indented."""
    import re
    import textwrap

    keep = re.compile(r"(?<=\bM) (?=\d)| (?=%)")  # "M 0.72" and "0.44 %" stay on one line
    return "\n".join(
        textwrap.fill(keep.sub("\u00a0", line), width, subsequent_indent="    ",
                      break_on_hyphens=False, break_long_words=False).replace("\u00a0", " ")
        for line in text.splitlines())


def _method(value: str) -> str:
    """``energy-state`` (the label every output uses) is the same as ``energy``."""
    return "energy" if value == "energy-state" else value


#: Figure file formats of ``--format`` (climbopt.plots.FIGURE_FORMATS, not imported here so that
#: ``climbopt --help`` does not load matplotlib).
_FIGURE_FORMATS = ("png", "svg", "pdf")


def _figure_formats(ctx, param, value: str) -> tuple[str, ...]:
    """``--format png,svg`` -> ("png", "svg"); unknown names are a usage error (exit 2)."""
    names = tuple(dict.fromkeys(v.strip().lower() for v in value.split(",") if v.strip()))
    bad = [n for n in names if n not in _FIGURE_FORMATS]
    if bad or not names:
        raise click.BadParameter(f"{value!r}: give one or more of {', '.join(_FIGURE_FORMATS)}, "
                                 "separated by commas (e.g. png,svg)")
    return names


def _format_option(f):
    return click.option("--format", "formats", default="png", show_default=True,
                        callback=_figure_formats, metavar="FORMATS",
                        help="Figure file formats, comma-separated: png, svg, pdf.")(f)


def _check_out_dir(out: Path) -> None:
    """Refuse an unusable output folder before any work (exit 2)."""
    from climbopt.report import OutputFolderError, check_output_folder

    try:
        check_output_folder(out)
    except OutputFolderError as exc:
        _fail(str(exc), EXIT_BAD_INPUT)


class _Terminated(BaseException):
    """SIGTERM arrived (raised by the handler :func:`_stoppable` installs)."""


@contextlib.contextmanager
def _stoppable(out: Path):
    """Ctrl-C (exit 130) and SIGTERM (exit 143) stop the command cleanly: nothing is written, an
    older output folder is left as it was, no temporary folder stays behind (the output folder
    is written atomically and swapped in with both signals held back)."""
    import signal

    def on_term(signum, frame):
        raise _Terminated()

    try:
        old = signal.signal(signal.SIGTERM, on_term)
    except ValueError:  # not the main thread (e.g. a test runner's worker): leave as it is
        old = None
    try:
        yield
    except KeyboardInterrupt:
        click.echo(f"\ninterrupted: nothing was written; {out} is as it was", err=True)
        raise SystemExit(EXIT_INTERRUPTED) from None
    except _Terminated:
        click.echo(f"terminated: nothing was written; {out} is as it was", err=True)
        raise SystemExit(EXIT_TERMINATED) from None
    finally:
        if old is not None:
            signal.signal(signal.SIGTERM, old)


@cli.command("run")
@click.argument("scenario_file", metavar="SCENARIO")
@click.option("--method", type=click.Choice(["energy", "energy-state", "collocation", "both"]),
              default="both", show_default=True,
              help="energy-state (or energy), direct collocation (warm-started from the "
                   "energy-state path of the same objective), or both.")
@click.option("--objective", type=click.Choice(["time", "fuel", "both"]), default="both",
              show_default=True, help="Minimum time, minimum fuel, or both.")
@click.option("--out", "out_dir", type=click.Path(file_okay=False), default=None,
              help="Output folder [default: out/<scenario file stem>]. Replaced as a whole.")
@click.option("--units", **UNITS_OPTION)
@click.option("--quiet", is_flag=True, help="No progress bars and no list of files.")
@click.option("--json", "as_json", is_flag=True,
              help="Print the summary as JSON on stdout (and nothing else).")
@click.option("--no-schedules", "no_schedules", is_flag=True,
              help="Skip the flown schedules (the best-schedule search for each objective and "
                   "the scenario's own [[schedules]]): the optimisation rows alone, sooner.")
@_format_option
def run(scenario_file, method, objective, out_dir, units, quiet, as_json, no_schedules,
        formats):
    """Solve SCENARIO, print the comparison table and write the results folder.

    Writes report.html (the whole run in one page), summary.json, comparison.csv, report.txt, a
    per-point CSV and a climb schedule CSV for each result, and the plots (PNG; SVG and PDF
    with --format). Exit codes: 0 ok, 2 bad input, 3 infeasible mission, 4 solver failure (an
    unconverged, unverified or over-capacity optimisation; the results are still written and
    labelled), 130 interrupted (Ctrl-C), 143 terminated.
    """
    from climbopt import report
    from climbopt.aircraft import build_model
    from climbopt.outputs import write_outputs
    from climbopt.pipeline import TimeLimitExceeded, run_mission
    from climbopt.rutowski import InfeasibleMission

    method = _method(method)
    scenario = _load_for_command(scenario_file, solver_options=method != "energy")
    units = _units_for(units, scenario)
    out = Path(out_dir) if out_dir else _default_out(scenario_file)
    _check_out_dir(out)
    objectives = ["time", "fuel"] if objective == "both" else [objective]
    bar = _Progress(_progress_enabled(quiet or as_json))
    with _stoppable(out):
        try:
            model = build_model(scenario)
        except ValueError as exc:
            _fail(f"{scenario_file}: the aircraft model cannot be built: {exc}", EXIT_BAD_INPUT)
        try:
            result = run_mission(scenario, model, method=method, objectives=objectives,
                                 schedules=not no_schedules, progress=bar.callback)
        except InfeasibleMission as exc:
            bar.done()
            _fail(f"{scenario_file}: infeasible mission: {exc}", EXIT_INFEASIBLE)
        except TimeLimitExceeded as exc:
            bar.done()
            _fail(f"{scenario_file}: {exc}", EXIT_SOLVER_FAILURE)
        finally:
            bar.done()
        code = EXIT_SOLVER_FAILURE if result.solver_failure else EXIT_OK
        try:
            doc = write_outputs(result, out, scenario, units=units, model=model,
                                exit_code=code, progress=bar.step,
                                formats=formats)
        except report.OutputFolderError as exc:
            _fail(str(exc), EXIT_BAD_INPUT)
        bar.done()
    if as_json:
        click.echo(report.dumps_summary(doc))
    else:
        _echo_run_text(scenario.name, doc, units, out, quiet)
    _echo_run_problems(result, code)
    if not as_json:
        click.echo(f"Caution: {CAUTION}")
    if code:
        raise SystemExit(code)


def _echo_run_text(name: str, doc: dict, units: str, out: Path, quiet: bool) -> None:
    """``run``'s text on stdout: the scenario, units and conditions, the comparison table, the
    text blocks of the summary document and (unless ``quiet``) what was written."""
    from climbopt import report

    click.echo(f"{name}")
    click.echo(_wrapped(f"units {report.units_words(units)}; {doc['conditions']['text']}"))
    click.echo("")
    click.echo(report.format_table(doc["results"], units))
    for block in doc["text"].values():
        if block:
            click.echo("")
            click.echo(_wrapped(block))
    if not quiet:
        click.echo(f"\nWrote {out}/: report.html, report.txt, summary.json, comparison.csv, "
                   f"schedules (*_schedule.csv), per-point tables, plots "
                   f"({len(doc['figures'])} files)")


def _echo_run_problems(result, code: int) -> None:
    """``run``'s warnings and errors on stderr, and with a solver failure the results not
    ranked."""
    for w in result.warnings:
        click.echo(f"warning: {w}", err=True)
    for e in result.errors:
        click.echo(f"error: {e}", err=True)
    if code == EXIT_SOLVER_FAILURE:
        bad = [r.label for r in result.results if not r.ranked and r.method != "schedule"]
        click.echo(f"error: not ranked (see the notes in summary.json): {', '.join(bad)}; the "
                   "other results were still written and are labelled as such.", err=True)


#: Largest grid (each axis) the map figures are drawn from: a figure 110 dpi wide shows no more,
#: and contouring a finer grid costs time and memory (800 x 800: about 2.5 times the memory).
_PLOT_GRID = 400


@cli.command("map")
@click.argument("scenario_file", metavar="SCENARIO")
@click.option("--out", "out_dir", type=click.Path(file_okay=False), default=None,
              help="Output folder [default: out/<scenario file stem>-map]. Replaced as a whole.")
@click.option("--units", **UNITS_OPTION)
@click.option("--mass", default=None, metavar="MASS",
              help="Mass of the map, with a unit as in a scenario file ('65 t', '150000 lb') "
                   "[default: the start mass].")
@click.option("--load-factor", type=float, default=1.0, show_default=True,
              help="Load factor n = L / W of the map (above 0, at most the scenario's "
                   "limits.max_load_factor).")
@click.option("--temperature-offset", default=None, metavar="DT",
              help="Temperature deviation from ISA, with a unit ('10 K', '-15 delta_degC') "
                   "[default: the scenario's].")
@click.option("--rating", default=None, help="Engine rating name [default: the mission's].")
@click.option("--quiet", is_flag=True, help="No progress and no list of files.")
@_format_option
def map_command(scenario_file, out_dir, units, mass, load_factor, temperature_offset, rating,
                quiet, formats):
    """Write the energy-state fields of SCENARIO (Ps, fuel flow, Ps / fuel flow, envelope) over
    altitude x true airspeed, as energy_map.npz and .csv, map.json and their plots; at the start
    mass, 1 g, the scenario's temperature and rating unless --mass, --load-factor,
    --temperature-offset or --rating say otherwise (validated like a scenario file); figures as PNG
    (SVG and PDF with --format).
    Exit codes: 0 ok, 2 bad input, 130 interrupted, 143 terminated."""
    from climbopt import plots, report
    from climbopt.aircraft import build_model
    from climbopt.energy import build_energy_map

    scenario = _changed(_load_for_command(scenario_file), mass=mass,
                        temperature_offset=temperature_offset, rating=rating)
    units = _units_for(units, scenario)
    if not (load_factor > 0.0 and load_factor <= scenario.limits.max_load_factor):
        _fail(f"--load-factor {load_factor:g}: expected a number above 0 and at most the "
              f"scenario's limits.max_load_factor {scenario.limits.max_load_factor:g}",
              EXIT_BAD_INPUT)
    out = Path(out_dir) if out_dir else _default_out(scenario_file, "-map")
    _check_out_dir(out)
    bar = _Progress(_progress_enabled(quiet))
    try:
        model = build_model(scenario)
        emap = build_energy_map(scenario, model=model, load_factor=load_factor)
    except ValueError as exc:
        _fail(f"{scenario_file}: the energy map cannot be built: {exc}", EXIT_BAD_INPUT)
    with _stoppable(out), report.atomic_output_dir(out, "climbopt map") as folder:
        bar.step("energy map")
        doc = report.write_energy_map(folder, emap, units, scenario.name, scenario_file)
        if max(emap.shape) > _PLOT_GRID:  # the figures need no finer grid than this
            emap = build_energy_map(scenario, model=model,
                                    shape=tuple(min(n, _PLOT_GRID) for n in emap.shape))
        figures = []
        for name, fig in plots.energy_map_figures(emap, [], units=units):
            figures += plots.save_figure(fig, folder / name, formats)
        doc["files"] += sorted(p.name for p in figures)
        report.write_summary_json(folder / "map.json", doc)
        bar.done()
    nh, nv = doc["shape"]  # the map's grid (its figures may be drawn from a coarser one)
    click.echo(f"{scenario.name}: energy map {nh} altitudes x {nv} speeds; "
               f"{report.map_conditions_text(emap, units)}")
    if not quiet:
        click.echo(f"Wrote {out}/: map.json, energy_map.npz, energy_map.csv, plots "
                   f"({len(figures)} files)")
    click.echo(f"Caution: {CAUTION}")


def _changed(scenario, **changes):
    """The scenario with the command line's changes (values as in a scenario file), validated by
    :meth:`Scenario.replace`; every problem is listed and the command exits with 2."""
    from climbopt.scenario import ScenarioError

    names = {"mass": "mass", "temperature_offset": "temperature_offset",
             "rating": "mission.rating"}
    given = {names[k]: v for k, v in changes.items() if v is not None}
    if not given:
        return scenario
    try:
        return scenario.replace(**given)
    except ScenarioError as exc:
        _fail(_problems_text(exc), EXIT_BAD_INPUT)


def _problems_text(exc) -> str:
    """A scenario error as printed: the file, the number of problems, one line per problem."""
    n = len(exc.problems)
    lines = [f"{exc.path}: {n} problem{'s' if n != 1 else ''} found:"]
    return "\n".join(lines + [f"  {fld}: {msg}" for fld, msg in exc.problems])


# ---- climbopt sweep (trade studies; the logic lives in climbopt/sweep.py) --------------------


@cli.command("sweep")
@click.argument("scenario_file", metavar="SCENARIO")
@click.option("--vary", "vary", multiple=True, required=True, metavar="NAME=VALUES",
              help="An input to vary, repeatable. NAME: mass, temperature_offset, thrust_scale, "
                   "target_altitude, target_speed (in the target's kind of speed), cost_weight. "
                   "VALUES: START:STOP:COUNT (ends included) or a comma list; units allowed "
                   "('mass=60 t:80 t:5', 'temperature_offset=-10,0,10,20 K'); a unit written once "
                   "applies to every value ('mass=60:80:5 t'); numbers without any unit only for "
                   "thrust_scale and a Mach target_speed.")
@click.option("--zip", "zip_values", is_flag=True,
              help="Take the i-th values of all --vary together instead of the full grid.")
@click.option("--method", type=click.Choice(["energy", "energy-state", "collocation"]),
              default="energy", show_default=True,
              help="Solver for every case (energy and energy-state are the same).")
@click.option("--objective", type=click.Choice(["time", "fuel", "weighted"]), default=None,
              help="Default: weighted when cost_weight is varied, else time.")
@click.option("--workers", type=click.IntRange(min=1), default=None,
              help="Local worker processes (default: all cores).")
@click.option("--serial", is_flag=True, help="Run the cases one after another in this process.")
@click.option("--cluster", metavar="ADDRESS", default=None,
              help="Run the cases on the Dask scheduler at ADDRESS (needs climbopt[dask]).")
@click.option("--out", "out_dir", type=click.Path(file_okay=False), default=None,
              help="Output folder (default: out/<scenario>-sweep); the table is sweep.csv there.")
@click.option("--parquet", is_flag=True, help="Also write sweep.parquet at the end (needs pyarrow).")
@click.option("--max-cases", type=click.IntRange(min=0), default=None,
              help="Solve at most this many new cases now; re-run to continue.")
@click.option("--retry-failed", is_flag=True, help="Solve again the cases recorded as failed.")
@click.option("--no-plots", is_flag=True, help="Write the table only.")
@click.option("--table", "office", is_flag=True,
              help="Also write the office tables: time, fuel and distance to climb by mass x "
                   "temperature deviation x target altitude (climb_table.csv, .md, .html).")
@click.option("--schedules", "fly_schedules", is_flag=True,
              help="Also fly each case's best constant CAS/Mach schedule (about half a second "
                   "a case): its speeds, time, fuel and penalty go to the table, and its speeds "
                   "to the office tables.")
@click.option("--units", **UNITS_OPTION)
@click.option("--quiet", is_flag=True, help="No progress bar.")
@click.option("--compile/--no-compile", "compile_", default=None,
              help="Collocation: compile the aircraft's point function to C once (cached on "
                   "disk) and use it in every case [default: solver.compile of the scenario, "
                   "else only when already cached or at least 8 cases are to be solved].")
def sweep_command(scenario_file, vary, zip_values, method, objective, workers, serial, cluster,
                  out_dir, parquet, max_cases, retry_failed, no_plots, office, fly_schedules,
                  units, quiet, compile_):
    """Solve SCENARIO for every combination of the --vary values (a trade study).

    Rows stream to the table as cases finish; a re-run of the same command skips the cases
    already in the table. A failed case is recorded with its status and error and does not stop
    the sweep (exit code 0); exit 2 for bad input, 1 when the workers or the cluster fail, 130
    when interrupted (the finished cases stay in the table). sweep.csv keeps every number in SI
    at full precision (for resuming and scripts); --table writes the rounded tables to hand over.
    """
    from climbopt import report
    from climbopt import sweep as sw

    if serial and (cluster or workers):
        raise click.UsageError("--serial cannot be combined with --cluster or --workers")
    if cluster and workers:
        raise click.UsageError("--workers is for the local pool; the cluster has its own workers")
    method = _method(method)
    scenario = _load_for_command(scenario_file, solver_options=method == "collocation")
    units = _units_for(units, scenario)
    try:
        variations = [sw.parse_variation(text, scenario) for text in vary]
        plan = sw.plan_sweep(scenario, variations, zip_values=zip_values, method=method,
                             objective=objective, schedules=fly_schedules)
        sw.check_optional_packages(parquet=parquet, cluster=bool(cluster))
    except sw.SweepError as exc:
        _fail(str(exc), EXIT_BAD_INPUT)

    folder = Path(out_dir) if out_dir else _default_out(scenario_file, "-sweep")
    table = folder / "sweep.csv"
    executor = "serial" if serial else ("dask" if cluster else "pool")
    click.echo(report.sweep_plan_text(plan, table))
    bar = _SweepProgress(_progress_enabled(quiet))
    try:
        result = sw.run_sweep(plan, table, executor=executor, workers=workers, cluster=cluster,
                              max_cases=max_cases, retry_failed=retry_failed,
                              on_start=bar.on_start, on_case=bar.on_case, compile=compile_)
    except KeyboardInterrupt:
        bar.close()
        click.echo(f"interrupted: the finished cases are in {table}; run the same command again "
                   f"to continue", err=True)
        raise SystemExit(130) from None
    except sw.SweepError as exc:
        bar.close()
        _fail(str(exc), EXIT_BAD_INPUT)
    except sw.SweepAborted as exc:
        bar.close()
        _fail(str(exc), 1)
    bar.close()
    written = _sweep_outputs(folder, table, plan, result.rows, parquet=parquet,
                             plots=not no_plots, office=office, units=units)
    for line in report.sweep_summary_lines(plan, result, executor, units):
        click.echo(line)
    click.echo(f"table: {table}")
    if written and not quiet:
        click.echo("files: " + ", ".join(str(p) for p in written))
    click.echo(f"Caution: {CAUTION}")


class _SweepProgress:
    """The sweep's progress on the terminal: the count of cases skipped (already in the table)
    and, when ``show``, a bar on stderr of the cases solved and failed. ``on_start`` and
    ``on_case`` are :func:`climbopt.sweep.run_sweep`'s callbacks."""

    def __init__(self, show: bool):
        self.show = show
        self.bar = None
        self.failed = 0

    def on_start(self, to_run: int, skipped: int) -> None:
        if skipped:
            click.echo(f"  {skipped} case{'s' if skipped != 1 else ''} already in the table: skipped")
        if self.show and to_run:
            self.bar = _tqdm_bar(total=to_run, unit="case", desc="sweep")

    def on_case(self, row: dict) -> None:
        if row["status"] != "ok":
            self.failed += 1
        if self.bar is not None:
            self.bar.set_postfix_str(f"failed {self.failed}", refresh=False)
            self.bar.update(1)

    def close(self) -> None:
        if self.bar is not None:
            self.bar.close()
            self.bar = None


def _sweep_outputs(folder: Path, table: Path, plan, rows: list, *, parquet: bool, plots: bool,
                   office: bool, units: str) -> list:
    """Write the outputs after the table (Parquet, figures, office tables) and return their
    paths; a SweepError exits with 2, any other failure is a warning (the table stays)."""
    from climbopt import sweep as sw

    written = []
    try:
        if parquet:
            written.append(sw.write_parquet(table, folder / "sweep.parquet"))
        if plots:
            from climbopt import plots as figures

            for stem, fig in figures.sweep_figures(plan, rows).items():
                written += figures.save_figure(fig, folder / stem)
        if office:
            from climbopt.office import write_office_tables

            written += write_office_tables(folder, plan, rows, units)
    except sw.SweepError as exc:
        _fail(str(exc), EXIT_BAD_INPUT)
    except Exception as exc:  # outputs after the table: report, keep the table
        click.echo(f"warning: could not write the outputs after the table (Parquet, plots, "
                   f"office tables): {type(exc).__name__}: {exc}", err=True)
    return written


# ---- climbopt reduce (flight-test reduction; the logic lives in climbopt/flighttest*.py) -----


@cli.command("reduce")
@click.argument("plan_file", metavar="TESTPLAN")
@click.option("--out", "out_dir", type=click.Path(file_okay=False), default=None,
              help="Output folder [default: out/<test plan stem>]. Replaced as a whole.")
@click.option("--units", **UNITS_OPTION)
@click.option("--schedule", is_flag=True,
              help="Also solve the predicted scenario's minimum-time climb on the measured "
                   "aircraft and compare it with the predicted one (bootstrap uncertainty).")
@click.option("--quiet", is_flag=True, help="No list of files.")
def reduce_command(plan_file, out_dir, units, schedule, quiet):
    """Reduce the flight-test data of TESTPLAN: standardised Ps points (standard weight,
    standard day, 1 g), the fitted Ps surface with its bootstrap uncertainty and the plots;
    with --schedule the measured aircraft's minimum-time climb against the predicted one.
    --units file (the default) follows the predicted scenario's file (SI without one).
    Exit codes: 0 ok, 2 bad input, 3 infeasible mission, 130 interrupted, 143 terminated."""
    from climbopt import flighttest_fit as ftf
    from climbopt import flighttest_report as ftr
    from climbopt import report
    from climbopt.flighttest_io import FlightTestError, load_test_plan

    t0 = time.perf_counter()
    try:
        plan = load_test_plan(plan_file)
    except FlightTestError as exc:
        n = len(exc.problems)
        lines = [f"{plan_file}: {n} problem{'s' if n != 1 else ''} found:"]
        lines += [f"  {f}: {w}: {m}" if w else f"  {f}: {m}" for f, w, m in exc.problems]
        _fail("\n".join(lines), EXIT_BAD_INPUT)
    units = _units_for(units, plan.predicted)
    if schedule and plan.predicted is None:
        _fail(f"{plan_file}: --schedule needs a [predicted] scenario in the test plan",
              EXIT_BAD_INPUT)
    out = Path(out_dir) if out_dir else _default_out(plan_file)
    _check_out_dir(out)
    try:
        reference, points = ftf.reduce_plan(plan)
        surface = ftf.fit_surface(points, reference, mach_degree=plan.mach_degree,
                                  altitude_degree=plan.altitude_degree,
                                  bootstrap=plan.bootstrap, seed=plan.seed)
    except ValueError as exc:
        _fail(f"{plan_file}: cannot reduce the data: {exc}", EXIT_BAD_INPUT)
    comparison = None
    if schedule:
        from climbopt.aircraft import build_model
        from climbopt.rutowski import InfeasibleMission

        try:
            comparison = ftf.compare_climbs(plan.predicted, build_model(plan.predicted), surface,
                                            bootstrap=plan.climb_bootstrap)
        except InfeasibleMission as exc:
            _fail(f"{plan_file}: infeasible mission: {exc}", EXIT_INFEASIBLE)
        except ValueError as exc:
            _fail(f"{plan_file}: the climbs cannot be solved: {exc}", EXIT_BAD_INPUT)
    with _stoppable(out), report.atomic_output_dir(out, "climbopt reduce") as folder:
        lines, doc = ftr.write_reduce_folder(folder, plan, points, surface, comparison, units)
    for line in lines:
        click.echo(line)
    if not quiet:
        click.echo(f"Wrote {out}/: {', '.join(doc['files'])} "
                   f"({time.perf_counter() - t0:.1f} s)")
    click.echo(f"Caution: {CAUTION}")
