"""Command line: a thin layer over the Python API (every command is a call a script could make).

Commands: ``predict`` (one structure), ``compare`` (one structure against a measured spectrum),
``rank`` (many candidates against a measured spectrum), ``check`` (is a measured sample the
intended structure? verdict, decoys, confidence, group evidence), ``batch`` (many structures,
result store), ``difference`` (what changed between two measured spectra), ``components`` (a
measured spectrum as a mixture of components), ``series`` (conversion over time), ``store`` (what the store holds), ``methods`` and
``solvents`` (what --method and --solvent accept).
Exit codes: 0 success, 2 bad input (one-line message), 3 calculation failed, 130 interrupted.
"""

from __future__ import annotations

import contextlib
import functools
import json
import os
import sys
import time
from pathlib import Path

import click

from . import __version__
from .analysis.scaling import SCALE_MODELS
from .calculation.methods import DEFAULT_METHOD
from .errors import CalculationError, InputError, VibestError
from .spectrum import DEFAULT_FWHM_CM1, LINE_SHAPES
from .structure import DEFAULT_SEED


class ProgressLine:
    """Progress on stderr: one rewritten line on a terminal, a few plain lines otherwise (the
    first of each stage, then one every 5 s; when the stage changes, the last line skipped is
    printed first, so that what the new stage works on, such as the candidate, is said)."""

    def __init__(self, enabled: bool = True, prefix: str = ""):
        self.enabled = enabled
        self.prefix = prefix
        self.tty = sys.stderr.isatty()
        self.last_stage = None
        self.last_print = 0.0
        self.skipped = ""
        self.t0 = time.perf_counter()

    def __call__(self, stage: str, done: int, total: int, message: str = "") -> None:
        if not self.enabled:
            return
        now = time.perf_counter()
        elapsed = now - self.t0
        if stage == "hessian":
            text = f"Hessian: {done}/{total} displaced gradients"
        elif stage == "optimisation":
            text = f"optimisation step {done}: {message}"
        else:
            text = f"{stage}: {message}"
        text = f"[{elapsed:6.1f} s] {self.prefix}{text}"
        if self.tty:
            click.echo("\r" + text.ljust(100)[:120], nl=False, err=True)
        elif stage != self.last_stage or now - self.last_print > 5.0 or (stage == "hessian" and done == total):
            if self.skipped and stage != self.last_stage:
                click.echo(self.skipped, err=True)
            click.echo(text, err=True)
            self.last_print, self.skipped = now, ""
        else:
            self.skipped = text
        self.last_stage = stage

    def finish(self) -> None:
        if self.enabled and self.tty:
            click.echo("", err=True)


def _fail(message: str, code: int) -> None:
    click.echo(f"vibest: error: {message}", err=True)
    sys.exit(code)


#: Suffixes an HTML report may have (--report).
REPORT_SUFFIXES = (".html", ".htm")


def _check_outputs(paths: dict[str, str | None], plots: tuple[str, ...] = ("--plot",)) -> None:
    """Every output path checked before any work (vibest.files.check_outputs); plots and the
    report must have a suffix their writer can produce."""
    from .files import check_outputs
    from .output import PLOT_FORMATS

    check_outputs(paths, {name: PLOT_FORMATS for name in plots} | {"--report": REPORT_SUFFIXES})


def _write_all(items) -> None:
    """Write every (option, path, write()) whose path is set; a failing one does not stop the
    others. Afterwards, failures are reported in one line each and the command exits with 2 (the
    calculation is kept in the result store, so running again costs no new calculation)."""
    failed = []
    for option, path, write in items:
        if not path:
            continue
        try:
            write()
            click.echo(f"wrote {path}", err=True)
        except (OSError, VibestError, ValueError) as exc:
            failed.append(f"{option} {path}: {getattr(exc, 'strerror', None) or exc}")
    if failed:
        for line in failed:
            click.echo(f"vibest: error: could not write {line}", err=True)
        click.echo("vibest: the result is kept in the result store: the same command again costs no calculation",
                   err=True)
        sys.exit(2)


@contextlib.contextmanager
def _user_errors(progress: ProgressLine | None = None):
    """Turn vibest's own errors into one-line messages and exit codes."""
    try:
        yield
    except InputError as exc:
        if progress:
            progress.finish()
        _fail(str(exc), 2)
    except CalculationError as exc:
        if progress:
            progress.finish()
        _fail(str(exc), 3)
    except BrokenPipeError:
        _quiet_broken_pipe()
    except OSError as exc:
        if progress:
            progress.finish()
        _fail(f"cannot read or write a file: {exc}", 2)
    except KeyboardInterrupt:
        if progress:
            progress.finish()
        _fail("interrupted", 130)


#: Options of calculation_options, turned into one ``calc`` argument (CalculationOptions).
_CALCULATION_KEYS = ("method", "seed", "workers", "largest_fragment", "backend", "solvent", "solvent_model",
                     "memory", "force")


def calculation_options(f):
    """Options that change the computed Hessian (and the resources of a DFT calculation); the
    command receives them as ``calc_values``, a dict for :func:`_calc_options`."""
    @functools.wraps(f)
    def wrapper(*args, **kwargs):
        kwargs["calc_values"] = {k: kwargs.pop(k) for k in _CALCULATION_KEYS}
        return f(*args, **kwargs)

    for opt in reversed([
        click.option("--method", default=DEFAULT_METHOD, show_default=True, metavar="METHOD",
                     help="Level of theory: gfn2, gfn1, b3lyp (DFT: minutes), or positions+intensities such as "
                          "gfn2+b3lyp (list: vibest methods)."),
        click.option("--seed", type=int, default=DEFAULT_SEED, show_default=True, help="3D embedding seed."),
        click.option("--workers", type=click.IntRange(min=1), default=None,
                     help="Parallel workers for the Hessian, or DFT threads [all cores]."),
        click.option("--largest-fragment", is_flag=True, help="For salts/mixtures, keep only the largest fragment."),
        click.option("--backend", type=click.Choice(["tblite", "xtb"]), default="tblite", show_default=True,
                     help="Library for the tight-binding methods."),
        click.option("--solvent", default=None, help="Implicit solvent (e.g. water; list: vibest solvents); default gas phase."),
        click.option("--solvent-model", type=click.Choice(["alpb", "cpcm"]), default="alpb", show_default=True),
        click.option("--memory", type=click.IntRange(min=1), default=4000, show_default=True, metavar="MB",
                     help="Memory a DFT calculation may use."),
        click.option("--force", is_flag=True, help="Compute a molecule above 250 atoms, or a DFT calculation "
                                                   "estimated to take hours."),
    ]):
        wrapper = opt(wrapper)
    return wrapper


def spectrum_options(f):
    """Options of the cheap stage (scaling and broadening)."""
    for opt in reversed([
        click.option("--scale-factor", type=float, default=None, help="A uniform scale factor instead of the fitted default."),
        click.option("--scale-model", type=click.Choice(SCALE_MODELS), default=None,
                     help="Fitted scaling to use [default: per-coordinate]."),
        click.option("--fwhm", type=float, default=DEFAULT_FWHM_CM1, show_default=True, help="Line width (FWHM), cm^-1."),
        click.option("--line-shape", type=click.Choice(LINE_SHAPES), default="lorentzian", show_default=True),
    ]):
        f = opt(f)
    return f


def _y_kind(what: str):
    return click.option("--y-kind", type=click.Choice(["absorbance", "transmittance"]), default=None,
                        help=f"What the Y values of {what} are (CSV); default: from the file's units, else guessed.")


def comparison_options(f):
    from .comparison import (DEFAULT_COMPARE_RANGE_CM1, DEFAULT_FIT_SHIFT, DEFAULT_INTENSITY_POWER,
                             DEFAULT_MATCH_TOLERANCE_CM1, DEFAULT_MAX_SHIFT_CM1, DEFAULT_SCORE, SCORES)

    for opt in reversed([
        _y_kind("the measured file"),
        click.option("--block", type=click.IntRange(min=1), default=None, help="Spectrum number in a multi-block JCAMP-DX file."),
        click.option("--score", "score_name", type=click.Choice(SCORES), default=DEFAULT_SCORE, show_default=True),
        click.option("--compare-range", type=(float, float), default=DEFAULT_COMPARE_RANGE_CM1, show_default=True,
                     metavar="LOW HIGH", help="Wavenumber range compared, cm^-1."),
        click.option("--fit-scale", is_flag=True, help="Fit an extra scale factor (0.95-1.05) that maximises the score."),
        click.option("--fit-shift/--no-fit-shift", default=DEFAULT_FIT_SHIFT, show_default=True,
                     help="Fit a common shift of the predicted wavenumbers (within +-MAX-SHIFT) that maximises the score."),
        click.option("--max-shift", type=click.FloatRange(0.0, 200.0, min_open=True), default=DEFAULT_MAX_SHIFT_CM1,
                     show_default=True, help="Largest fitted shift, cm^-1."),
        click.option("--baseline", is_flag=True, help="Remove a rubber-band (lower convex hull) baseline from the measured spectrum."),
        click.option("--tolerance", type=float, default=DEFAULT_MATCH_TOLERANCE_CM1, show_default=True,
                     help="Largest shift for a peak match, cm^-1."),
        click.option("--phase", type=click.Choice(["auto", "gas", "condensed"]), default="auto", show_default=True,
                     help="gas: give predicted bands rotational P/Q/R contours; auto: from the file's ##STATE, "
                          "##SAMPLING PROCEDURE or title (said in a note)."),
        click.option("--intensity-power", type=click.FloatRange(0.1, 2.0), default=DEFAULT_INTENSITY_POWER,
                     show_default=True, help="Compare curves as y**p (p < 1: weak bands count more)."),
    ]):
        f = opt(f)
    return sample_options(f)


#: Options of sample_options, turned into one ``sample_values`` argument (see :func:`_comparison`).
_SAMPLE_KEYS = ("atr", "atr_angle", "keep_atmospheric", "exclude_windows", "matrix", "no_h_bonds")


def sample_options(f):
    """How the sample was recorded: ATR correction, atmospheric bands, mull or matrix windows; the
    command receives them as ``sample_values``."""
    from .sampling import CRYSTALS, MATRIX_WINDOWS

    @functools.wraps(f)
    def wrapper(*args, **kwargs):
        kwargs["sample_values"] = {k: kwargs.pop(k) for k in _SAMPLE_KEYS}
        return f(*args, **kwargs)

    for opt in reversed([
        click.option("--atr", type=click.Choice(["auto", "off", *CRYSTALS]), default="auto", show_default=True,
                     help="ATR correction of the measured spectrum: auto (when the file says ATR; diamond), off, "
                          "or the crystal."),
        click.option("--atr-angle", type=click.FloatRange(10.0, 80.0), default=45.0, show_default=True,
                     help="ATR angle of incidence, degrees."),
        click.option("--no-h-bonds", is_flag=True,
                     help="Condensed samples: compare O-H/N-H bands of free molecules instead of computing "
                          "hydrogen-bonded clusters (seconds to a minute per candidate with a donor, stored)."),
        click.option("--keep-atmospheric", is_flag=True,
                     help="Keep the CO2 and water-vapour windows found in a condensed-phase spectrum in the comparison."),
        click.option("--exclude-window", "exclude_windows", type=(float, float), multiple=True, metavar="LOW HIGH",
                     help="Leave a window (cm^-1) out of the comparison (repeatable)."),
        click.option("--matrix", type=click.Choice(sorted(MATRIX_WINDOWS)), default=None,
                     help="Leave out the bands of a mull oil or pellet matrix: " + "; ".join(
                         f"{k}: {', '.join(f'{a:.0f}-{b:.0f}' for a, b in v)}" for k, v in sorted(MATRIX_WINDOWS.items()))
                          + " cm^-1."),
    ]):
        wrapper = opt(wrapper)
    return wrapper


def store_options(f):
    """Where computed records are kept (and found again)."""
    for opt in reversed([
        click.option("--store", "store_path", metavar="FILE", default=None,
                     help="Result store (SQLite file) [$VIBEST_STORE or ~/.cache/vibest/store.sqlite]."),
        click.option("--no-store", is_flag=True, help="Neither read nor write the result store."),
    ]):
        f = opt(f)
    return f


def mass_options(f):
    """What is known of the sample's mass (vibest.ms): a mass spectrum, formula or nominal mass."""
    for opt in reversed([
        click.option("--ms", "ms_path", type=click.Path(dir_okay=False), default=None, metavar="FILE",
                     help="Mass spectrum of the sample (JCAMP-DX or CSV of m/z, intensity): candidates are checked "
                          "against its molecular ion and isotope pattern."),
        click.option("--ms-block", type=click.IntRange(min=1), default=None, metavar="N",
                     help="Block number in a JCAMP-DX file of several [the first mass spectrum]."),
        click.option("--formula", default=None, metavar="FORMULA", help="Molecular formula of the sample, e.g. C2Cl4."),
        click.option("--mass", "nominal_mass", type=click.IntRange(min=1), default=None, metavar="M",
                     help="Nominal molecular mass of the sample."),
        click.option("--ms-drop", is_flag=True, help="Leave out candidates the mass evidence contradicts."),
    ]):
        f = opt(f)
    return f


def _mass_evidence(ms_path, ms_block, formula, nominal_mass, ms_drop):
    """vibest.ms.MassEvidence of the mass options, or None when none was given."""
    from .ms import MassEvidence, load_mass_spectrum

    if ms_path is None and formula is None and nominal_mass is None:
        if ms_drop or ms_block:
            raise InputError("--ms-drop and --ms-block need --ms, --formula or --mass")
        return None
    spectrum = load_mass_spectrum(ms_path, block=ms_block) if ms_path else None
    return MassEvidence(spectrum, formula, nominal_mass, ms_drop)


def refine_options(f):
    """A second look at the best candidates at a density-functional level (rank, check)."""
    for opt in reversed([
        click.option("--refine", type=click.IntRange(min=0), default=0, show_default=True, metavar="K",
                     help="Recompute the best K candidates at --refine-method and rank them again."),
        click.option("--refine-method", default="b3lyp", show_default=True, metavar="METHOD",
                     help="Level of theory for --refine (a density-functional one, e.g. b3lyp or gfn2+b3lyp)."),
    ]):
        f = opt(f)
    return f


def report_option(f):
    return click.option("--report", "report_path", metavar="FILE.html", default=None,
                        help="One self-contained HTML report (interactive overlays, tables, method; opens offline).")(f)


def _phase(choice: str):
    return {"auto": None, "gas": True, "condensed": False}[choice]


def _comparison(score_name, compare_range, fit_scale, fit_shift, max_shift, baseline, tolerance, phase,
                intensity_power, sample_values=None):
    """The vibest.comparison.ComparisonOptions of the comparison options (checked)."""
    from .comparison import check_range, comparison_options

    check_range(compare_range)
    if tolerance <= 0:
        raise InputError(f"--tolerance {tolerance:g}: the peak-match tolerance must be positive (cm^-1)")
    return comparison_options(score_name=score_name, range_cm1=tuple(compare_range), fit_scale=fit_scale,
                              fit_shift=fit_shift, shift_bounds_cm1=(-max_shift, max_shift), baseline=baseline,
                              tolerance_cm1=tolerance, gas_phase=_phase(phase), intensity_power=intensity_power,
                              **_sample(sample_values or {}))


def _sample(values: dict) -> dict:
    """ComparisonOptions fields of the sample options."""
    from .sampling import MATRIX_WINDOWS

    if not values:
        return {}
    windows = tuple(tuple(w) for w in values["exclude_windows"]) + MATRIX_WINDOWS.get(values["matrix"], ())
    return {"atr": values["atr"], "atr_angle_deg": values["atr_angle"], "keep_atmospheric": values["keep_atmospheric"],
            "exclude_cm1": windows, "hydrogen_bonding": not values["no_h_bonds"]}


def _store(path, disabled: bool):
    from .store import RecordStore

    return None if disabled else RecordStore(path)


def _calc_options(method=DEFAULT_METHOD, seed=DEFAULT_SEED, workers=None, largest_fragment=False, backend="tblite", solvent=None,
                  solvent_model="alpb", memory=4000, force=False):
    from .calculation.driver import calculation_options as build

    return build(method, seed=seed, largest_fragment=largest_fragment, backend=backend, solvent=solvent,
                 solvent_model=solvent_model, workers=workers, memory_mb=memory, allow_long=force)


def _spec_options(scale_factor, scale_model, fwhm, line_shape, range_cm1=(400.0, 4000.0)):
    from .pipeline import SpectrumOptions

    opts = SpectrumOptions(scale_factor=scale_factor, fwhm_cm1=fwhm, line_shape=line_shape,
                           range_cm1=tuple(range_cm1), scale_model=scale_model)
    opts.validate()
    opts.resolve_scale()
    return opts


class _StdoutUntilReaderGoes:
    """sys.stdout that, once its reader has gone (``| head``), drops further output instead of
    raising, so that a command still writes the files it was asked for (--plot, --csv, --json...)
    and ends normally; until 2026-12-04 the first write after ``head`` had read its lines ended the
    command at once, with exit 0 and the files not written."""

    def __init__(self, stream):
        self._stream = stream
        self.reader_gone = False

    def write(self, text):
        if not self.reader_gone:
            try:
                return self._stream.write(text)
            except BrokenPipeError:
                self._drop()
        return len(text)

    def flush(self):
        if not self.reader_gone:
            try:
                self._stream.flush()
            except BrokenPipeError:
                self._drop()

    def _drop(self):
        self.reader_gone = True
        _stdout_to_devnull(self._stream)  # what is still buffered goes nowhere, also at exit

    def __getattr__(self, name):
        return getattr(self._stream, name)


class _Commands(click.Group):
    """The command group, with click's own usage errors turned into one line like vibest's."""

    def main(self, args=None, prog_name=None, complete_var=None, standalone_mode=True, **extra):
        stdout = sys.stdout
        sys.stdout = _StdoutUntilReaderGoes(stdout)
        try:
            return super().main(args=args, prog_name=prog_name, complete_var=complete_var, standalone_mode=False,
                                **extra)
        except click.exceptions.Abort:
            _fail("interrupted", 130)
        except click.ClickException as exc:
            ctx = getattr(exc, "ctx", None)
            hint = f" (see {ctx.command_path} --help)" if ctx is not None else ""
            _fail(exc.format_message().replace("\n", " ") + hint, exc.exit_code)
        except BrokenPipeError:
            _quiet_broken_pipe()
        finally:
            sys.stdout = stdout


def _stdout_to_devnull(stream) -> None:
    """Point ``stream``'s file descriptor at /dev/null (its reader has gone); streams without one
    (a test runner's buffer) are left as they are."""
    try:
        os.dup2(os.open(os.devnull, os.O_WRONLY), stream.fileno())
    except (OSError, ValueError, AttributeError):
        pass


def _quiet_broken_pipe() -> None:
    """Output piped into a program that stopped reading (``| head``): end quietly, as Unix tools do."""
    _stdout_to_devnull(sys.stdout)
    sys.exit(0)


@click.group(cls=_Commands, context_settings={"help_option_names": ["-h", "--help"]})
@click.version_option(__version__, prog_name="vibest")
def main() -> None:
    """vibest: predicted IR spectra from structure (GFN1-/GFN2-xTB or DFT, harmonic, scaled),
    compared with measured spectra; verdicts on whether a sample is the intended structure.

    Predictions are estimates: confirm identifications with reference standards.
    """
    import signal

    def terminate(signum, frame):  # SIGTERM ends a command the way Ctrl-C does (summary, exit 130)
        raise KeyboardInterrupt

    try:
        signal.signal(signal.SIGTERM, terminate)
    except ValueError:  # not the main thread (e.g. a test runner's worker thread)
        pass


@main.command("predict")
@click.argument("smiles")
@click.option("--csv", "csv_path", metavar="FILE", help="Write the broadened spectrum as CSV.")
@click.option("--jcamp", "jcamp_path", metavar="FILE", help="Write the broadened spectrum as JCAMP-DX.")
@click.option("--bands-csv", metavar="FILE", help="Write the band list (wavenumber, intensity, character) as CSV.")
@click.option("--json", "json_path", metavar="FILE", help="Write the full result (geometry, modes, settings) as JSON.")
@click.option("--record", "record_path", metavar="FILE",
              help="Write the Hessian record (JSON) for later re-analysis without new gradients.")
@click.option("--plot", "plot_path", metavar="FILE", help="Write a plot (.png, .svg or .pdf).")
@report_option
@click.option("--transmittance", is_flag=True, help="Plot %T instead of absorbance.")
@click.option("--range", "range_cm1", type=(float, float), default=(400.0, 4000.0), show_default=True,
              metavar="LOW HIGH", help="Spectrum range, cm^-1.")
@calculation_options
@spectrum_options
@click.option("--min-intensity", type=float, default=0.0, help="Hide bands weaker than this (km/mol) in the table.")
@click.option("--isotope", "isotopes", multiple=True, metavar="SPEC",
              help="Also show band shifts of an isotopologue: D (exchangeable H), D-all, 13C@3, 18O ... (repeatable; "
                   "atom numbers as the table's '# atoms' line gives them).")
@click.option("--isotopes-csv", metavar="FILE", help="Write the isotopologue band shifts as CSV.")
@click.option("--thermo", is_flag=True, help="Print ZPE, enthalpy, entropy and Gibbs energy.")
@click.option("--temperature", type=float, default=298.15, show_default=True, help="Temperature for --thermo, K.")
@click.option("--pressure", type=float, default=101325.0, show_default=True, help="Pressure for --thermo, Pa.")
@click.option("--quasi-harmonic", is_flag=True, help="Grimme's quasi-RRHO entropy for low modes (--thermo).")
@click.option("--symmetry-number", type=click.IntRange(min=1), default=None,
              help="Rotational symmetry number for --thermo [from the structure].")
@click.option("--conformers", is_flag=True, help="Search conformers and print the Boltzmann-weighted spectrum.")
@click.option("--max-conformers", type=click.IntRange(min=1), default=50, show_default=True,
              help="Cap on embedded conformers (--conformers).")
@click.option("--energy-window", type=float, default=3.0, show_default=True,
              help="Hessians for conformers within this many kcal/mol of the lowest (--conformers).")
@click.option("--weights", "weighting", type=click.Choice(["energy", "free-energy"]), default="energy",
              show_default=True, help="Boltzmann weights from electronic or harmonic free energies (--conformers).")
@store_options
@click.option("-v", "--verbose", is_flag=True, help="Show gradient counts and timings.")
@click.option("-q", "--quiet", is_flag=True, help="No progress output.")
def predict_command(smiles, csv_path, jcamp_path, bands_csv, json_path, record_path, plot_path, report_path, transmittance,
                    range_cm1, calc_values, scale_factor, scale_model, fwhm,
                    line_shape, min_intensity, isotopes, isotopes_csv, thermo, temperature, pressure, quasi_harmonic,
                    symmetry_number, conformers, max_conformers, energy_window, weighting, store_path, no_store,
                    verbose, quiet) -> None:
    """Predict the IR spectrum of SMILES and print its bands."""
    from . import output
    from .files import write_table
    from .pipeline import isotopologue, prediction_thermochemistry
    from .ranking import predict_stored

    progress = ProgressLine(enabled=not quiet)
    with _user_errors(progress):
        _check_outputs({"--csv": csv_path, "--jcamp": jcamp_path, "--bands-csv": bands_csv, "--json": json_path,
                        "--record": record_path, "--plot": plot_path, "--isotopes-csv": isotopes_csv,
                        "--report": report_path})
        if isotopes_csv and not isotopes:
            raise InputError("--isotopes-csv needs at least one --isotope")
        if report_path and conformers:
            raise InputError("--report is not available with --conformers yet: use --json and --plot")
        _check_analysis_options(isotopes, temperature, pressure)
        if conformers:
            _predict_ensemble(smiles, progress, temperature=temperature, csv_path=csv_path, jcamp_path=jcamp_path,
                              json_path=json_path, plot_path=plot_path, transmittance=transmittance,
                              calc=_calc_options(**calc_values),
                              spec=_spec_options(scale_factor, scale_model, fwhm, line_shape, range_cm1),
                              max_conformers=max_conformers, energy_window=energy_window, weighting=weighting)
            return
        calc = _calc_options(**calc_values)
        pred, _ = predict_stored(smiles, calc, _spec_options(scale_factor, scale_model, fwhm, line_shape, range_cm1),
                                 _store(store_path, no_store), progress)
        progress.finish()
        click.echo(output.bands_table(pred, min_intensity, verbose=verbose))
        iso_rows, iso_json = [], []
        if isotopes or verbose:
            click.echo(output.atom_numbers(pred.record))
        for spec in isotopes:
            _, shifts = isotopologue(pred, spec)
            click.echo(output.isotope_table(spec, shifts))
            iso_rows += output.isotope_rows(spec, shifts)
            iso_json.append({"isotopologue": spec, "shifts": [s.to_dict() for s in shifts]})
        if thermo:
            click.echo(output.thermo_summary(prediction_thermochemistry(
                pred, temperature, pressure, symmetry_number, quasi_harmonic)))
        _write_all([("--csv", csv_path, lambda: output.write_spectrum_csv(pred, csv_path)),
                    ("--jcamp", jcamp_path, lambda: output.write_spectrum_jcamp(pred, jcamp_path)),
                    ("--bands-csv", bands_csv, lambda: output.write_bands_csv(pred, bands_csv)),
                    ("--json", json_path, lambda: output.write_json(pred, json_path,
                                                                    extra={"isotopologues": iso_json} if iso_json else None)),
                    ("--isotopes-csv", isotopes_csv, lambda: write_table(isotopes_csv, output.ISOTOPE_HEADER, iso_rows, {
                        "what": "vibest isotopologue band shifts", "smiles": pred.smiles, "caution": output.CAUTION})),
                    ("--record", record_path, lambda: pred.record.save(record_path)),
                    ("--plot", plot_path, lambda: output.plot_prediction(pred, plot_path, transmittance=transmittance)),
                    ("--report", report_path, lambda: _report(report_path, "prediction_report", pred, calc))])


def _report(path, builder: str, *args, **kwargs) -> None:
    """Write the HTML report made by vibest.report.<builder>(*args, **kwargs)."""
    from . import report

    report.write_report(path, getattr(report, builder)(*args, **kwargs))


def _check_analysis_options(isotopes, temperature_K: float, pressure_Pa: float) -> None:
    """Options used after the expensive stage, checked before it (a mistake costs no calculation)."""
    from .analysis.isotopes import parse_isotope_spec

    for spec in isotopes:
        parse_isotope_spec(spec)
    if not (0 < temperature_K < 1e5):
        raise InputError(f"temperature {temperature_K} K must be above 0 (and below 1e5)")
    if not (0 < pressure_Pa < 1e12):
        raise InputError(f"pressure {pressure_Pa} Pa must be above 0")


def _predict_ensemble(smiles, progress, *, temperature, csv_path, jcamp_path, json_path, plot_path, transmittance,
                      calc, spec, max_conformers, energy_window, weighting) -> None:
    from . import output
    from .ensemble import EnsembleOptions, predict_ensemble
    from .files import atomic_write_text

    ens = predict_ensemble(smiles, calc=calc, spec=spec, progress=progress,
                           ens=EnsembleOptions(max_conformers=max_conformers, energy_window_kcal=energy_window,
                                               temperature_K=temperature, weighting=weighting))
    progress.finish()
    click.echo(output.ensemble_table(ens))
    _write_all([("--csv", csv_path, lambda: output.write_spectrum_csv(ens, csv_path)),
                ("--jcamp", jcamp_path, lambda: output.write_spectrum_jcamp(ens, jcamp_path)),
                ("--json", json_path, lambda: atomic_write_text(
                    json_path, json.dumps(ens.to_dict() | {"caution": output.CAUTION}, indent=1))),
                ("--plot", plot_path, lambda: output.plot_prediction(ens, plot_path, transmittance=transmittance))])


@main.command("methods")
def methods_command() -> None:
    """List the levels of theory (--method)."""
    from .calculation.methods import METHODS

    for m in METHODS.values():
        click.echo(f"{m.key:<8} {m.name:<24} {m.description}")
    click.echo("positions+intensities, e.g. gfn1+b3lyp: GFN1-xTB geometry and modes, B3LYP dipole derivatives")


@main.command("solvents")
def solvents_command() -> None:
    """List the implicit solvents (--solvent) and models (--solvent-model)."""
    from .calculation.engine import SOLVENT_MODELS, SOLVENT_NAMES, SOLVENTS

    click.echo("solvents: " + ", ".join(SOLVENTS))
    click.echo("also by name: " + ", ".join(f"{name} ({key})" for name, key in sorted(SOLVENT_NAMES.items())))
    click.echo("models: " + ", ".join(SOLVENT_MODELS) + " (default alpb)")


@main.command("compare")
@click.argument("measured", type=click.Path(dir_okay=False))
@click.argument("smiles")
@comparison_options
@calculation_options
@spectrum_options
@click.option("--plot", "plot_path", metavar="FILE", help="Overlay plot (.png, .svg, .pdf).")
@click.option("--json", "json_path", metavar="FILE", help="Comparison with peak table as JSON.")
@report_option
@store_options
@click.option("-q", "--quiet", is_flag=True, help="No progress output.")
def compare_command(measured, smiles, y_kind, block, score_name, compare_range, fit_scale, fit_shift, max_shift, baseline,
                    tolerance, phase, intensity_power, sample_values, calc_values, scale_factor, scale_model, fwhm,
                    line_shape, plot_path, json_path, report_path, store_path, no_store, quiet) -> None:
    """Compare the predicted spectrum of SMILES with a MEASURED spectrum (JCAMP-DX or CSV)."""
    from . import output
    from .comparison import compare
    from .files import atomic_write_text
    from .measured import load_spectrum
    from .ranking import predict_stored

    progress = ProgressLine(enabled=not quiet)
    with _user_errors(progress):
        _check_outputs({"--plot": plot_path, "--json": json_path, "--report": report_path})
        copts = _comparison(score_name, compare_range, fit_scale, fit_shift, max_shift, baseline, tolerance, phase,
                            intensity_power, sample_values)
        spec = load_spectrum(measured, kind=y_kind, block=block)
        calc = _calc_options(**calc_values)
        sopts = _spec_options(scale_factor, scale_model, fwhm, line_shape)
        store = _store(store_path, no_store)
        pred, _ = predict_stored(smiles, calc, sopts, store, progress)
        if copts.computes_hydrogen_bonding(spec):
            from .hydrogen_bonding import with_hydrogen_bonding

            pred = with_hydrogen_bonding(pred, calc, store, progress)
        progress.finish()
        comp = compare(pred, spec, copts)
        for note in spec.notes:
            click.echo(f"# note: {note}")
        click.echo(output.comparison_summary(comp))
        click.echo(output.peak_table(comp))
        click.echo(f"# caution: {output.CAUTION}")
        _write_all([("--plot", plot_path, lambda: output.plot_overlay(comp, plot_path,
                                                                      measured_label=f"measured {Path(measured).name}")),
                    ("--json", json_path, lambda: atomic_write_text(json_path, json.dumps(
                        comp.to_dict(include_curves=True) | {"caution": output.CAUTION,
                                                             "measured_notes": list(spec.notes)}, indent=1))),
                    ("--report", report_path, lambda: _report(report_path, "comparison_report", comp, pred, spec,
                                                              calc=calc))])


@main.command("rank")
@click.argument("measured", type=click.Path(dir_okay=False))
@click.argument("candidates", nargs=-1)
@click.option("--candidates-file", type=click.Path(dir_okay=False), default=None,
              help="File of candidates: 'SMILES [name]' per line, or CSV with smiles,name columns.")
@comparison_options
@calculation_options
@spectrum_options
@click.option("--csv", "csv_path", metavar="FILE", help="Ranked table as CSV.")
@click.option("--json", "json_path", metavar="FILE", help="Ranking with peak tables as JSON.")
@report_option
@click.option("--plot-dir", metavar="DIR", default=None, help="Write overlay plots of the best candidates here.")
@click.option("--top", type=click.IntRange(min=1), default=3, show_default=True, help="How many overlays to plot.")
@refine_options
@mass_options
@click.option("--decoys", type=click.IntRange(min=0), default=0, show_default=True, metavar="N",
              help="Also rank up to N decoys (isomers, functional-group changes) of each candidate.")
@store_options
@click.option("-q", "--quiet", is_flag=True, help="No progress output.")
def rank_command(measured, candidates, candidates_file, y_kind, block, score_name, compare_range, fit_scale, fit_shift,
                 max_shift, baseline, tolerance, phase, intensity_power, sample_values, calc_values, scale_factor, scale_model,
                 fwhm, line_shape, csv_path, json_path, report_path, plot_dir, top, refine, refine_method, ms_path, ms_block,
                 formula, nominal_mass, ms_drop, decoys, store_path, no_store, quiet) -> None:
    """Rank CANDIDATES (SMILES, or a --candidates-file) by similarity to a MEASURED spectrum."""
    from . import output
    from .confidence import assess
    from .files import atomic_write_text
    from .measured import load_spectrum
    from .ranking import Candidate, rank_candidates, read_candidates, with_decoys

    progress = ProgressLine(enabled=not quiet)
    with _user_errors(progress):
        _check_outputs({"--csv": csv_path, "--json": json_path, "--plot-dir": None, "--report": report_path})
        if plot_dir:
            _check_outputs({"--plot-dir": str(Path(plot_dir) / "rank1.png")}, plots=())
        cands = [Candidate(s, s) for s in candidates]
        if candidates_file:
            cands += read_candidates(candidates_file)
        if not cands:
            raise InputError("give candidate SMILES as arguments or with --candidates-file")
        if decoys:
            cands = with_decoys(cands, decoys)
        evidence = _mass_evidence(ms_path, ms_block, formula, nominal_mass, ms_drop)
        checks, dropped_checks = evidence.screen(cands) if evidence else ([], [])
        dropped = {c.smiles for c in dropped_checks}
        if dropped and len(dropped) == len({c.smiles for c in cands}):
            raise InputError("the mass evidence contradicts every candidate ("
                             + "; ".join(f"{c.name}: {c.reason}" for c in checks[:3]) + (" ..." if len(checks) > 3 else "")
                             + ")")
        cands = [c for c in cands if c.smiles not in dropped]
        spec = load_spectrum(measured, kind=y_kind, block=block)
        calc = _calc_options(**calc_values)
        sopts = _spec_options(scale_factor, scale_model, fwhm, line_shape)
        refine_calc = _calc_options(**(calc_values | {"method": refine_method})) if refine else None

        def report(done, total, name):
            progress("candidates", done, total, f"{done}/{total} {name}")

        copts = _comparison(score_name, compare_range, fit_scale, fit_shift, max_shift, baseline, tolerance, phase,
                            intensity_power, sample_values)
        ranking = rank_candidates(spec, cands, calc=calc, spec=sopts, store=_store(store_path, no_store),
                                  options=copts, progress=report, refine=refine, refine_calc=refine_calc,
                                  refine_progress=progress)
        progress.finish()
        if not any(e.comparison is not None for e in ranking.entries):
            reasons = "; ".join(f"{e.candidate.name}: {e.error}" for e in ranking.entries[:3])
            raise InputError(f"no candidate could be ranked ({reasons}"
                             + (" ..." if len(ranking.entries) > 3 else "") + ")")
        assessment = assess(ranking, (refine_calc if refine else calc).method_name, sopts.fwhm_cm1)
        click.echo(output.ranking_table(ranking, assessment))
        if checks:
            click.echo(f"\nmass evidence ({evidence.describe()}):\n" + output.mass_table(checks)
                       + "".join(f"\n  dropped from the ranking: {c.name}" for c in checks if c.smiles in dropped))
        items = [("--csv", csv_path, lambda: ranking.write_csv(csv_path)),
                 ("--json", json_path, lambda: atomic_write_text(json_path, json.dumps(
                     ranking.to_dict() | {"assessment": assessment.to_dict(),
                                          "mass_checks": [c.to_dict() for c in checks]}, indent=1))),
                 ("--report", report_path, lambda: _report(report_path, "ranking_report", ranking, assessment,
                                                           refine_calc if refine else calc, checks, top=max(top, 3)))]
        if plot_dir:
            for e in [e for e in ranking.entries if e.comparison][:top]:
                path = Path(plot_dir) / f"rank{e.rank}.png"
                items.append(("--plot-dir", str(path), functools.partial(
                    output.plot_overlay, e.comparison, path, measured_label=f"measured {Path(measured).name}",
                    title=f"rank {e.rank}: {e.candidate.name}  ({score_name} score {e.score:.3f}"
                          + (f", {e.method})" if refine else ")"),
                    name=e.candidate.name)))
        _write_all(items)


@main.command("check")
@click.argument("measured", type=click.Path(dir_okay=False))
@click.argument("smiles")
@click.option("--name", default=None, help="Name of the intended structure in the report [its SMILES].")
@click.option("--decoys", type=click.IntRange(min=0), default=8, show_default=True, metavar="N",
              help="How many decoys (isomers, functional-group changes) to rank against it.")
@click.option("--candidates-file", type=click.Path(dir_okay=False), default=None,
              help="Further candidates: 'SMILES [name]' per line, or CSV with smiles,name columns.")
@comparison_options
@calculation_options
@spectrum_options
@refine_options
@mass_options
@click.option("--json", "json_path", metavar="FILE", help="The verdict with ranking and evidence as JSON.")
@report_option
@click.option("--plot", "plot_path", metavar="FILE", help="Overlay of the intended structure (.png, .svg, .pdf).")
@store_options
@click.option("-q", "--quiet", is_flag=True, help="No progress output.")
def check_command(measured, smiles, name, decoys, candidates_file, y_kind, block, score_name, compare_range, fit_scale,
                  fit_shift, max_shift, baseline, tolerance, phase, intensity_power, sample_values, calc_values, scale_factor,
                  scale_model, fwhm, line_shape, refine, refine_method, ms_path, ms_block, formula, nominal_mass,
                  ms_drop, json_path, report_path, plot_path, store_path, no_store, quiet) -> None:
    """Is the MEASURED sample the structure SMILES? A verdict in plain words, with its decoys
    ranked, a calibrated confidence, flags and the evidence of each functional group."""
    from . import output
    from .files import atomic_write_text
    from .measured import load_spectrum
    from .ranking import read_candidates
    from .verdict import check_structure

    progress = ProgressLine(enabled=not quiet)
    with _user_errors(progress):
        _check_outputs({"--json": json_path, "--plot": plot_path, "--report": report_path})
        extra = read_candidates(candidates_file) if candidates_file else []
        spec = load_spectrum(measured, kind=y_kind, block=block)
        calc = _calc_options(**calc_values)
        sopts = _spec_options(scale_factor, scale_model, fwhm, line_shape)
        refine_calc = _calc_options(**(calc_values | {"method": refine_method})) if refine else None

        def report(done, total, label):
            progress("candidates", done, total, f"{done}/{total} {label}")

        verdict = check_structure(spec, smiles, name=name, decoys=decoys, candidates=extra, calc=calc, spec=sopts,
                                  store=_store(store_path, no_store), progress=report, refine=refine,
                                  refine_calc=refine_calc, refine_progress=progress,
                                  options=_comparison(score_name, compare_range, fit_scale, fit_shift, max_shift,
                                                      baseline, tolerance, phase, intensity_power,
                                                      sample_values),
                                  mass_evidence=_mass_evidence(ms_path, ms_block, formula, nominal_mass, ms_drop))
        progress.finish()
        click.echo(output.verdict_report(verdict))
        mine = next(e for e in verdict.ranking.entries if e.candidate == verdict.intended)
        _write_all([("--json", json_path, lambda: atomic_write_text(json_path, json.dumps(verdict.to_dict(), indent=1))),
                    ("--plot", plot_path, lambda: output.plot_overlay(
                        mine.comparison, plot_path, measured_label=f"measured {Path(measured).name}",
                        title=f"{output.short(verdict.intended.label, 60)}: {verdict.conclusion} (rank {mine.rank}"
                              + (f", {mine.method})" if refine else ")"),
                        name=verdict.intended.name)),
                    ("--report", report_path, lambda: _report(report_path, "verdict_report", verdict,
                                                              refine_calc if refine else calc))])


class BatchBar:
    """Batch progress on stderr: a bar with counts and an ETA (rewritten line on a terminal,
    a plain line every few seconds otherwise)."""

    def __init__(self, enabled: bool = True, width: int = 24):
        self.enabled = enabled
        self.width = width
        self.tty = sys.stderr.isatty()
        self.t0 = time.perf_counter()
        self.counts = {"computed": 0, "stored": 0, "failed": 0}
        self.worked = 0  # molecules that needed a calculation (stored ones and bad SMILES take no time)
        self.last_print = 0.0

    def __call__(self, done: int, total: int, entry) -> None:
        if entry.status in self.counts:
            self.counts[entry.status] += 1
        if entry.seconds > 0:
            self.worked += 1
        if not self.enabled:
            return
        now = time.perf_counter()
        elapsed = now - self.t0
        eta = elapsed / self.worked * (total - done) if self.worked else None
        filled = int(self.width * done / max(total, 1))
        text = (f"[{'#' * filled}{'.' * (self.width - filled)}] {done}/{total}  computed {self.counts['computed']}"
                f"  stored {self.counts['stored']}  failed {self.counts['failed']}  elapsed {_clock(elapsed)}"
                f"  ETA {_clock(eta) if eta is not None and done < total else '--:--'}")
        if self.tty:
            click.echo("\r" + text, nl=False, err=True)
        elif now - self.last_print > 5.0 or done == total:
            click.echo(text, err=True)
            self.last_print = now

    def finish(self) -> None:
        if self.enabled and self.tty:
            click.echo("", err=True)


def _clock(seconds: float) -> str:
    s = int(round(seconds))
    return f"{s // 3600}:{s % 3600 // 60:02d}:{s % 60:02d}" if s >= 3600 else f"{s // 60:02d}:{s % 60:02d}"


@main.command("batch")
@click.argument("input_path", metavar="INPUT", type=click.Path(dir_okay=False))
@click.option("-o", "--table", "table_path", metavar="FILE", default=None,
              help="Summary table (CSV) [INPUT stem + '.vibest.csv' beside the input].")
@click.option("--output-dir", metavar="DIR", default=None,
              help="Also write each molecule's bands (JSON) and spectrum (CSV) here.")
@calculation_options
@spectrum_options
@store_options
@click.option("--scheduler", metavar="ADDRESS", default=None,
              help="Run on a Dask cluster (e.g. tcp://host:8786) instead of local processes.")
@click.option("--retry-failed", is_flag=True, help="Compute again molecules whose failure is in the store.")
@click.option("-q", "--quiet", is_flag=True, help="No progress output.")
def batch_command(input_path, table_path, output_dir, calc_values,
                  scale_factor, scale_model, fwhm, line_shape, store_path, no_store, scheduler, retry_failed,
                  quiet) -> None:
    """Predict every molecule of INPUT (one 'SMILES [name]' per line, or CSV with smiles,name columns).

    Molecules already in the result store are not recomputed; a failure is recorded for its
    molecule and the batch goes on. Here --workers counts molecules computed at once (each on
    one core). Interrupt at any time: finished molecules are kept, a re-run does the rest.
    """
    import tempfile

    from .batch import predict_many, read_batch_input
    from .batch.run import write_batch_table
    from .pipeline import CAUTION
    from .store import RecordStore

    bar = BatchBar(enabled=not quiet)
    with _user_errors():
        molecules = read_batch_input(input_path)
        table = Path(table_path) if table_path else Path(input_path).with_suffix(".vibest.csv")
        _check_outputs({"--table": str(table)})
        calc = _calc_options(**(calc_values | {"workers": None}))
        workers = calc_values["workers"] or (1 if calc.uses_dft else None)  # a DFT molecule takes every core
        sopts = _spec_options(scale_factor, scale_model, fwhm, line_shape)
        tmp = None
        if no_store:
            tmp = tempfile.TemporaryDirectory(prefix="vibest-batch-")
            store = RecordStore(Path(tmp.name) / "store.sqlite")
        else:
            store = RecordStore(store_path)
        client = None
        if scheduler:
            from .batch.pool import DaskPool

            client = DaskPool.connect(scheduler).client
        click.echo(f"{len(molecules)} molecules from {input_path}; store {store.path if not no_store else '(none)'}",
                   err=True)
        try:
            entries = predict_many(molecules, store=store, calc=calc, spec=sopts, workers=workers, client=client,
                                   output_dir=output_dir, retry_failed=retry_failed, progress=bar)
        finally:
            bar.finish()
            if client is not None:
                client.close()
        write_batch_table(entries, table)
        counts = {k: sum(e.status == k for e in entries) for k in ("computed", "stored", "failed", "not run")}
        click.echo(f"computed {counts['computed']}, from store {counts['stored']}, failed {counts['failed']}"
                   + (f", not run {counts['not run']} (interrupted: run the same command again to finish)"
                      if counts["not run"] else ""), err=True)
        for e in entries:
            if e.status == "failed":
                click.echo(f"  row {e.row} {e.name}: {e.reason}", err=True)
        click.echo(f"wrote {table}", err=True)
        click.echo(f"# caution: {CAUTION}", err=True)
        store.close()
        if tmp is not None:
            tmp.cleanup()
        if counts["not run"]:
            sys.exit(130)


@main.command("store")
@click.option("--store", "store_path", metavar="FILE", default=None,
              help="Result store (SQLite file) [$VIBEST_STORE or ~/.cache/vibest/store.sqlite].")
@click.option("--list", "list_rows", is_flag=True, help="List the stored molecules.")
def store_command(store_path, list_rows) -> None:
    """Show what the result store holds and check its integrity."""
    from .store import RecordStore

    with _user_errors():
        store = RecordStore(store_path)
        if not store.path.exists():
            raise InputError(f"no result store at {store.path}")
        click.echo(f"store {store.path}: schema version {store.schema_version()}, {store.count()} records, "
                   f"{store.failure_count()} failures, integrity {store.integrity_check()}")
        if list_rows:
            click.echo(f"{'key':<12}  {'InChIKey':<27}  {'atoms':>5}  {'energy / Eh':>16}  {'method':<22}  "
                       f"SMILES  (name)")
            for key, smiles, inchikey, natoms, energy, name, method in store.rows():
                click.echo(f"{key[:12]}  {inchikey or '-':27}  {natoms or '':>5}  "
                           f"{'' if energy is None else f'{energy:.8f}':>16}  {method[:22]:<22}  {smiles}"
                           + (f"  ({name})" if name else ""))
        store.close()


def result_outputs(csv_help: str, plot_help: str, json_help: str):
    """--csv, --plot, --json of a command whose result has write_csv and to_dict, then the store
    options and -q (see :func:`_write_result`)."""
    def deco(f):
        for opt in reversed([
            click.option("--csv", "csv_path", metavar="FILE", help=csv_help),
            click.option("--plot", "plot_path", metavar="FILE", help=plot_help + " (.png, .svg, .pdf)."),
            click.option("--json", "json_path", metavar="FILE", help=json_help),
        ]):
            f = opt(f)
        f = report_option(f)
        f = store_options(f)
        return click.option("-q", "--quiet", is_flag=True, help="No progress output.")(f)
    return deco


def _write_result(result, plot, csv_path, plot_path, json_path, report_path=None) -> None:
    """Echo the caution and write the result's CSV, plot (``plot(result, path)``), JSON and report."""
    from .files import atomic_write_text
    from .pipeline import CAUTION

    click.echo(f"# caution: {CAUTION}")
    _write_all([("--csv", csv_path, lambda: result.write_csv(csv_path)),
                ("--plot", plot_path, lambda: plot(result, plot_path)),
                ("--json", json_path, lambda: atomic_write_text(json_path, json.dumps(result.to_dict(), indent=1))),
                ("--report", report_path, lambda: _report(report_path, "result_report", result))])


@main.command("difference")
@click.argument("before", type=click.Path(dir_okay=False))
@click.argument("after", type=click.Path(dir_okay=False))
@click.option("--start", "start_smiles", metavar="SMILES", default=None,
              help="Starting material: the bands that go are named by its predicted bands.")
@click.option("--product", "product_smiles", metavar="SMILES", default=None,
              help="Product: the bands that appear are named by its predicted bands.")
@click.option("--scale-on", type=(float, float), default=None, metavar="LOW HIGH",
              help="Scale BEFORE on the band in this window, cm^-1 (a solvent or standard band) "
                   "[automatic: the strongest band both share].")
@click.option("--no-scaling", is_flag=True, help="Keep both spectra as recorded (same cell and path length).")
@click.option("--baseline", is_flag=True, help="Subtract a rubber-band baseline from both first.")
@_y_kind("both files")
@calculation_options
@spectrum_options
@result_outputs("Curves and their difference as CSV.", "Both spectra and the difference", "The band changes as JSON.")
def difference_command(before, after, start_smiles, product_smiles, scale_on, no_scaling, baseline, y_kind,
                       calc_values, scale_factor, scale_model, fwhm, line_shape, csv_path, plot_path, json_path, report_path,
                       store_path, no_store, quiet) -> None:
    """What changed from BEFORE to AFTER (two measured spectra): the difference spectrum and the
    bands that appear or go, named by the predicted bands of --start and --product."""
    from .difference import difference_spectrum, plot_difference
    from .measured import load_spectrum
    from .ranking import predict_stored

    progress = ProgressLine(enabled=not quiet)
    with _user_errors(progress):
        _check_outputs({"--csv": csv_path, "--plot": plot_path, "--json": json_path, "--report": report_path})
        if no_scaling and scale_on:
            raise InputError("--scale-on and --no-scaling exclude each other")
        specs = [load_spectrum(p, kind=y_kind) for p in (before, after)]
        calc = _calc_options(**calc_values)
        sopts = _spec_options(scale_factor, scale_model, fwhm, line_shape)
        store = _store(store_path, no_store)
        preds = [predict_stored(s, calc, sopts, store, progress)[0] if s else None
                 for s in (start_smiles, product_smiles)]
        progress.finish()
        diff = difference_spectrum(*specs, scale_on_cm1=scale_on, scale=1.0 if no_scaling else None, start=preds[0],
                          product=preds[1], baseline=baseline)
        for spec in specs:
            for note in spec.notes:
                click.echo(f"# note: {spec.source}: {note}")
        click.echo(diff.summary())
        _write_result(diff, plot_difference, csv_path, plot_path, json_path, report_path)


def _reference_arg(text: str) -> tuple[str, str, float | None]:
    """--reference 'FILE[=NAME][@CONCENTRATION]' -> (file, name, concentration)."""
    what, conc = text, None
    if "@" in text:
        what, _, c = text.rpartition("@")
        try:
            conc = float(c)
        except ValueError:
            raise InputError(f"--reference {text!r}: the concentration after @ must be a number") from None
    path, _, name = what.partition("=")
    if not path.strip():
        raise InputError(f"--reference {text!r}: no file before the name")
    return path.strip(), (name.strip() or Path(path.strip()).name), conc


@main.command("components")
@click.argument("measured", type=click.Path(dir_okay=False))
@click.option("--smiles", "smiles_list", multiple=True, metavar="'SMILES [NAME]'",
              help="A predicted component, optionally named after a space (repeat for more).")
@click.option("--reference", "references", multiple=True, metavar="FILE[=NAME][@CONC]",
              help="A measured reference spectrum, optionally with the concentration it was recorded at (repeat).")
@click.option("--compare-range", type=(float, float), default=None, metavar="LOW HIGH",
              help="Wavenumber range fitted, cm^-1 [500 3800].")
@click.option("--baseline", is_flag=True, help="Subtract a rubber-band baseline from the measured spectrum.")
@_y_kind("the files")
@calculation_options
@spectrum_options
@result_outputs("One row per component as CSV.", "Measured spectrum with the stacked components", "The fit as JSON.")
def components_command(measured, smiles_list, references, compare_range, baseline, y_kind, calc_values, scale_factor,
                       scale_model, fwhm, line_shape, csv_path, plot_path, json_path, report_path, store_path, no_store,
                       quiet) -> None:
    """Fit MEASURED as a non-negative mixture of components (predicted from --smiles, or measured
    --reference files): absorbance and estimated mole fractions with uncertainties."""
    from .comparison import DEFAULT_COMPARE_RANGE_CM1, check_range
    from .components import Component, fit_components, plot_components
    from .measured import load_spectrum
    from .ranking import candidate_of_line, predict_stored

    progress = ProgressLine(enabled=not quiet)
    with _user_errors(progress):
        _check_outputs({"--csv": csv_path, "--plot": plot_path, "--json": json_path, "--report": report_path})
        if not smiles_list and not references:
            raise InputError("give the components: --smiles SMILES and/or --reference FILE (each repeatable)")
        rng = tuple(compare_range) if compare_range else DEFAULT_COMPARE_RANGE_CM1
        check_range(rng)
        spec = load_spectrum(measured, kind=y_kind)
        calc = _calc_options(**calc_values)
        sopts = _spec_options(scale_factor, scale_model, fwhm, line_shape)
        store = _store(store_path, no_store)
        comps = []
        for text in references:
            path, name, conc = _reference_arg(text)
            comps.append(Component(name, reference=load_spectrum(path, kind=y_kind), concentration=conc))
        for k, text in enumerate(smiles_list):
            if not text.strip():
                raise InputError("--smiles: empty")
            cand = candidate_of_line(text)
            smiles, name = cand.smiles, cand.name
            progress("components", k, len(smiles_list), name)
            comps.append(Component(name, prediction=predict_stored(smiles, calc, sopts, store, progress)[0]))
        progress.finish()
        fit = fit_components(spec, comps, range_cm1=rng, baseline=baseline)
        click.echo(fit.summary())
        _write_result(fit, plot_components, csv_path, plot_path, json_path, report_path)


@main.command("series")
@click.argument("files", nargs=-1, type=click.Path(dir_okay=False))
@click.option("--list", "list_path", type=click.Path(dir_okay=False), default=None,
              help="CSV with a 'file' and a 'time_<unit>' column (e.g. time_min) [else: the JCAMP-DX date/time labels].")
@click.option("--start", "start_smiles", metavar="SMILES", required=True, help="Starting material.")
@click.option("--product", "product_smiles", metavar="SMILES", required=True, help="Product.")
@click.option("--conversion-by", "series_method", type=click.Choice(["band", "fit"]), default="band", show_default=True,
              help="Conversion from the fading diagnostic band of the starting material, or from a component fit.")
@_y_kind("the files")
@calculation_options
@spectrum_options
@result_outputs("Conversion against time as CSV.", "Conversion against time", "The series as JSON.")
def series_command(files, list_path, start_smiles, product_smiles, series_method, y_kind, calc_values, scale_factor,
                   scale_model, fwhm, line_shape, csv_path, plot_path, json_path, report_path, store_path, no_store, quiet) -> None:
    """Conversion of --start to --product over time, from measured FILES (or --list) of a reaction,
    with the diagnostic band used."""
    from .ranking import predict_stored
    from .series import conversion_series, load_series, plot_series

    progress = ProgressLine(enabled=not quiet)
    with _user_errors(progress):
        _check_outputs({"--csv": csv_path, "--plot": plot_path, "--json": json_path, "--report": report_path})
        spectra, times, unit = load_series(list_path, list(files), kind=y_kind)
        calc = _calc_options(**calc_values)
        sopts = _spec_options(scale_factor, scale_model, fwhm, line_shape)
        store = _store(store_path, no_store)
        start, product = (predict_stored(s, calc, sopts, store, progress)[0] for s in (start_smiles, product_smiles))
        progress.finish()
        series = conversion_series(spectra, times, start, product, time_unit=unit, method=series_method)
        click.echo(series.summary())
        _write_result(series, plot_series, csv_path, plot_path, json_path, report_path)


if __name__ == "__main__":  # pragma: no cover
    main()
