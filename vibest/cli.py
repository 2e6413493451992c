"""Command line: a thin layer over the Python API (every command is a call a script could make).

Exit codes: 0 success, 2 bad input (one-line message), 3 calculation failed, 130 interrupted.
"""

from __future__ import annotations

import sys
import time
from pathlib import Path

import click

from . import __version__
from .errors import CalculationError, InputError
from .analysis.scaling import SCALE_MODELS
from .spectrum import DEFAULT_FWHM_CM1, LINE_SHAPES


class ProgressLine:
    """Progress on stderr: one rewritten line on a terminal, a few plain lines otherwise."""

    def __init__(self, enabled: bool = True):
        self.enabled = enabled
        self.tty = sys.stderr.isatty()
        self.last_stage = None
        self.last_print = 0.0
        self.t0 = time.perf_counter()

    def __call__(self, stage: str, done: int, total: int, message: str = "") -> None:
        if not self.enabled:
            return
        now = time.perf_counter()
        elapsed = now - self.t0
        if stage == "hessian":
            text = f"[{elapsed:6.1f} s] Hessian: {done}/{total} displaced gradients"
        elif stage == "optimisation":
            text = f"[{elapsed:6.1f} s] optimisation step {done}: {message}"
        else:
            text = f"[{elapsed:6.1f} s] {stage}: {message}"
        if self.tty:
            click.echo("\r" + text.ljust(90)[:110], nl=False, err=True)
            if stage == "hessian" and done == total:
                click.echo("", err=True)
        elif stage != self.last_stage or now - self.last_print > 5.0 or (stage == "hessian" and done == total):
            click.echo(text, err=True)
            self.last_print = now
        self.last_stage = stage

    def finish(self) -> None:
        if self.enabled and self.tty:
            click.echo("", err=True)


def _fail(message: str, code: int) -> None:
    click.echo(f"vibest: error: {message}", err=True)
    sys.exit(code)


def _check_output_path(path: str | None, suffixes: tuple[str, ...] | None = None) -> None:
    if path is None:
        return
    p = Path(path)
    if suffixes and p.suffix.lower() not in suffixes:
        raise InputError(f"{path}: file type must be one of {', '.join(suffixes)}")
    if p.parent and not p.parent.exists():
        p.parent.mkdir(parents=True, exist_ok=True)


@click.group(context_settings={"help_option_names": ["-h", "--help"]})
@click.version_option(__version__, prog_name="vibest")
def main() -> None:
    """vibest: predicted IR spectra from structure (GFN2-xTB, harmonic, scaled).

    Predictions are estimates: confirm identifications with reference standards.
    """


@main.command("predict")
@click.argument("smiles")
@click.option("--csv", "csv_path", metavar="FILE", help="Write the broadened spectrum as CSV.")
@click.option("--bands-csv", metavar="FILE", help="Write the band list (wavenumber, intensity, character) as CSV.")
@click.option("--json", "json_path", metavar="FILE", help="Write the full result (geometry, modes, settings) as JSON.")
@click.option("--record", "record_path", metavar="FILE",
              help="Write the Hessian record (JSON) for later re-analysis without new gradients.")
@click.option("--plot", "plot_path", metavar="FILE", help="Write a plot (.png, .svg or .pdf).")
@click.option("--transmittance", is_flag=True, help="Plot %T instead of absorbance.")
@click.option("--scale-factor", type=float, default=None, help="A uniform scale factor instead of the fitted default.")
@click.option("--scale-model", type=click.Choice(SCALE_MODELS), default=None,
              help="Fitted scaling to use [default: per-coordinate].")
@click.option("--fwhm", type=float, default=DEFAULT_FWHM_CM1, show_default=True, help="Line width (FWHM), cm^-1.")
@click.option("--line-shape", type=click.Choice(LINE_SHAPES), default="lorentzian", show_default=True)
@click.option("--range", "range_cm1", type=(float, float), default=(400.0, 4000.0), show_default=True,
              metavar="LOW HIGH", help="Spectrum range, cm^-1.")
@click.option("--seed", type=int, default=0xB1B, show_default=True, help="3D embedding seed.")
@click.option("--workers", type=click.IntRange(min=1), default=None, help="Processes for the Hessian [all cores].")
@click.option("--largest-fragment", is_flag=True, help="For salts/mixtures, keep only the largest fragment.")
@click.option("--backend", type=click.Choice(["tblite", "xtb"]), default="tblite", show_default=True)
@click.option("--solvent", default=None, help="ALPB implicit solvent name (e.g. water); default gas phase.")
@click.option("--min-intensity", type=float, default=0.0, help="Hide bands weaker than this (km/mol) in the table.")
@click.option("-v", "--verbose", is_flag=True, help="Show gradient counts and timings.")
@click.option("-q", "--quiet", is_flag=True, help="No progress output.")
def predict_command(smiles, csv_path, bands_csv, json_path, record_path, plot_path, transmittance, scale_factor, scale_model,
                    fwhm, line_shape, range_cm1, seed, workers, largest_fragment, backend, solvent, min_intensity,
                    verbose, quiet) -> None:
    """Predict the IR spectrum of SMILES and print its bands."""
    from . import output
    from .predict import predict

    progress = ProgressLine(enabled=not quiet)
    try:
        _check_output_path(plot_path, output.PLOT_FORMATS)
        for p in (csv_path, bands_csv, json_path, record_path):
            _check_output_path(p)
        pred = predict(smiles, seed=seed, largest_fragment=largest_fragment, scale_factor=scale_factor,
                       scale_model=scale_model,
                       fwhm_cm1=fwhm, line_shape=line_shape, range_cm1=range_cm1, workers=workers,
                       backend=backend, solvent=solvent, progress=progress)
        progress.finish()
        click.echo(output.bands_table(pred, min_intensity, verbose=verbose))
        written = []
        if csv_path:
            output.write_spectrum_csv(pred, csv_path)
            written.append(csv_path)
        if bands_csv:
            output.write_bands_csv(pred, bands_csv)
            written.append(bands_csv)
        if json_path:
            output.write_json(pred, json_path)
            written.append(json_path)
        if record_path:
            pred.record.save(record_path)
            written.append(record_path)
        if plot_path:
            output.plot_prediction(pred, plot_path, transmittance=transmittance)
            written.append(plot_path)
        for p in written:
            click.echo(f"wrote {p}", err=True)
    except InputError as exc:
        progress.finish()
        _fail(str(exc), 2)
    except CalculationError as exc:
        progress.finish()
        _fail(str(exc), 3)
    except OSError as exc:
        progress.finish()
        _fail(f"cannot write output: {exc}", 2)
    except KeyboardInterrupt:
        progress.finish()
        _fail("interrupted", 130)


if __name__ == "__main__":  # pragma: no cover
    main()
