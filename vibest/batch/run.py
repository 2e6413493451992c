"""Batch prediction of many molecules: skip what is stored, record failures, never stop early.

Flow: read the input -> canonical key per molecule -> already stored? (status "stored") ->
otherwise a task on the pool (local processes or Dask) -> the coordinating process writes each
finished record to the store at once (one transaction per molecule, so an interruption loses at
most the molecules in flight) -> cheap analysis for the summary table and optional files.
"""

from __future__ import annotations

import re
from dataclasses import dataclass, field
from pathlib import Path
from typing import Callable, Iterable

from ..errors import InputError, VibestError
from ..pipeline import CAUTION, CalculationOptions, SpectrumOptions, analyse
from ..ranking import Candidate, as_candidates, check_settings_types, read_candidates
from ..store import RecordStore, open_store, structure_identity

#: Statuses of a batch entry.
STATUSES = ("computed", "stored", "failed", "not run")

#: progress(done, total, entry) after each molecule (entry is the finished :class:`BatchEntry`).
BatchProgress = Callable[[int, int, "BatchEntry"], None]


@dataclass(frozen=True)
class KeyBand:
    """One of the strongest bands: scaled wavenumber (cm^-1), intensity (km/mol), label."""

    wavenumber_cm1: float
    intensity_km_mol: float
    label: str

    def __str__(self) -> str:
        return f"{self.wavenumber_cm1:.0f} {self.label} ({self.intensity_km_mol:.0f} km/mol)"


@dataclass(frozen=True)
class BatchEntry:
    """Outcome for one input row.

    Attributes:
        row: 1-based position in the input.
        name, smiles: as given.
        canonical_smiles: RDKit canonical SMILES ("" when the SMILES cannot be read).
        status: "computed" (now), "stored" (found in the store), "failed", or "not run" (interrupted).
        reason: why it failed (one line), else "".
        key_bands: the strongest bands, strongest first.
        natoms: atom count including H; energy_hartree: GFN2-xTB energy (Eh) at the optimised geometry.
        seconds: wall time of the calculation (0 when stored).
        files: paths written for this molecule.
        notes: remarks of the calculation.
    """

    row: int
    name: str
    smiles: str
    canonical_smiles: str
    status: str
    reason: str = ""
    key_bands: tuple[KeyBand, ...] = ()
    natoms: int | None = None
    energy_hartree: float | None = None
    seconds: float = 0.0
    files: tuple[str, ...] = ()
    notes: tuple[str, ...] = field(default_factory=tuple)

    @property
    def ok(self) -> bool:
        return self.status in ("computed", "stored")


def read_batch_input(path: str | Path) -> list[Candidate]:
    """Molecules from a file: ``SMILES [name]`` per line, or CSV with 'smiles' (and 'name') columns."""
    return read_candidates(path)


def _safe_name(text: str) -> str:
    return re.sub(r"[^A-Za-z0-9._-]+", "_", text).strip("_")[:80] or "molecule"


def key_bands(pred, count: int = 3, degenerate_cm1: float = 1.0) -> tuple[KeyBand, ...]:
    """The ``count`` strongest bands of a prediction inside its spectrum's range (far-IR torsions
    below it are not what an IR spectrometer shows); degenerate modes (same label, within
    ``degenerate_cm1``) count as one band with their intensities summed."""
    lo, hi = pred.spectrum.wavenumbers_cm1[0], pred.spectrum.wavenumbers_cm1[-1]
    merged: list[list] = []
    for b in sorted((b for b in pred.bands if lo <= b.wavenumber_cm1 <= hi), key=lambda b: b.wavenumber_cm1):
        label = b.label or b.character
        if merged and merged[-1][2] == label and b.wavenumber_cm1 - merged[-1][0] <= degenerate_cm1:
            merged[-1][1] += b.intensity_km_mol
        else:
            merged.append([b.wavenumber_cm1, b.intensity_km_mol, label])
    merged.sort(key=lambda m: -m[1])
    return tuple(KeyBand(w, i, label) for w, i, label in merged[:count])


def _summarise(cand: Candidate, row: int, canonical: str, status: str, record, spec: SpectrumOptions,
               key_band_count: int, output_dir: Path | None, seconds: float) -> BatchEntry:
    from .. import output

    pred = analyse(record, spec)
    bands = key_bands(pred, key_band_count)
    files: list[str] = []
    if output_dir is not None:
        stem = output_dir / f"{row:05d}_{_safe_name(cand.name)}"
        output.write_json(pred, stem.with_suffix(".json"))
        output.write_spectrum_csv(pred, stem.with_suffix(".csv"))
        files = [str(stem.with_suffix(".json")), str(stem.with_suffix(".csv"))]
    return BatchEntry(row, cand.name, cand.smiles, canonical, status, "", bands, record.natoms,
                      record.energy_hartree, seconds, tuple(files), pred.notes)


def predict_many(molecules: Iterable, *, store: RecordStore | str | Path | None = None,
                 calc: CalculationOptions = CalculationOptions(), spec: SpectrumOptions = SpectrumOptions(),
                 workers: int | None = None, client=None, output_dir: str | Path | None = None,
                 retry_failed: bool = False, key_band_count: int = 3,
                 progress: BatchProgress | None = None) -> list[BatchEntry]:
    """Predict many molecules, reusing and filling a result store.

    Args:
        molecules: SMILES strings, (name, smiles) pairs or :class:`vibest.ranking.Candidate` objects.
        store: a :class:`RecordStore`, a path to its SQLite file, or None for the default store.
        calc, spec: settings of the expensive and the cheap stage.
        workers: local worker processes (default all cores; 1 runs in this process). Each
            molecule's Hessian then runs on one core.
        client: a ``dask.distributed.Client``: run the calculations on its cluster instead.
        output_dir: if given, write ``<row>_<name>.json`` (bands, modes) and ``.csv`` (spectrum) per molecule.
        retry_failed: compute again molecules whose failure is stored (default: report the stored reason).
        key_band_count: how many of the strongest bands to list per molecule.
        progress: callback after each molecule.

    Returns one :class:`BatchEntry` per input row, in input order. Failures never raise; a
    KeyboardInterrupt stops the batch after storing everything finished so far.
    """
    from ..calculation.hessian import default_workers
    from .pool import DaskPool, InProcessPool, LocalPool

    check_settings_types(calc=calc, spec=spec)
    spec.validate()
    spec.resolve_scale(calc.engine.method)
    cands = as_candidates(molecules, "predict_many")
    store = open_store(store)
    out_dir = Path(output_dir) if output_dir is not None else None
    if out_dir is not None:
        try:
            out_dir.mkdir(parents=True, exist_ok=True)
        except OSError as exc:
            raise InputError(f"cannot create output folder {out_dir}: {exc.strerror or exc}") from None
    entries: dict[int, BatchEntry] = {}
    total = len(cands)

    def finish(row: int, entry: BatchEntry) -> None:
        entries[row] = entry
        if progress:
            progress(len(entries), total, entry)

    # Structures and keys; duplicates of one structure are computed once.
    jobs: dict[str, list[tuple[int, Candidate, str]]] = {}
    identities: dict[str, tuple[str, str]] = {}
    for row, cand in enumerate(cands, start=1):
        if cand.problem:
            finish(row, BatchEntry(row, cand.name, cand.smiles, "", "failed", cand.problem))
            continue
        try:
            canonical, inchikey = structure_identity(cand.smiles)
        except InputError as exc:
            finish(row, BatchEntry(row, cand.name, cand.smiles, "", "failed", str(exc)))
            continue
        key = store.key_of(canonical, inchikey, calc)
        identities[key] = (canonical, inchikey)
        jobs.setdefault(key, []).append((row, cand, canonical))

    todo: list[tuple[int, str, CalculationOptions]] = []
    by_job: dict[int, str] = {}
    for key, rows in jobs.items():
        record = store.get_by_key(key)
        if record is not None:
            for row, cand, canonical in rows:
                finish(row, _summarise(cand, row, canonical, "stored", record, spec, key_band_count, out_dir, 0.0))
            continue
        reason = None if retry_failed else store.failure(key)
        if reason is not None:
            for row, cand, canonical in rows:
                finish(row, BatchEntry(row, cand.name, cand.smiles, canonical, "failed",
                                       f"{reason} (stored failure; --retry-failed computes it again)"))
            continue
        job_id = len(todo)
        by_job[job_id] = key
        todo.append((job_id, rows[0][1].smiles, calc))

    # another batch on the same store may be computing some of these: leave them to it
    claimed, held = store.claim([by_job[j] for j, _, _ in todo])
    if held:
        todo = [t for t in todo if by_job[t[0]] not in held]
        for key, holder in held.items():
            for row, cand, canonical in jobs[key]:
                finish(row, BatchEntry(row, cand.name, cand.smiles, canonical, "not run",
                                       f"being computed by another batch ({holder}); run again afterwards"))
    if client is not None:
        pool = DaskPool(client)
    else:
        n = workers or default_workers()
        pool = InProcessPool() if n == 1 or len(todo) <= 1 else LocalPool(min(n, len(todo)))
    try:
        for outcome in pool.run(todo):
            key = by_job[outcome.job_id]
            rows = jobs[key]
            if outcome.record is not None:
                store.put(rows[0][1].smiles, calc, outcome.record, identity=identities[key], name=rows[0][1].name)
                for row, cand, canonical in rows:
                    try:
                        entry = _summarise(cand, row, canonical, "computed", outcome.record, spec, key_band_count,
                                           out_dir, outcome.seconds)
                    except VibestError as exc:  # analysis of a stored record failed: keep the record
                        entry = BatchEntry(row, cand.name, cand.smiles, canonical, "failed", f"analysis: {exc}")
                    finish(row, entry)
            else:
                store.put_failure(rows[0][1].smiles, calc, outcome.reason or "unknown failure",
                                  identity=identities[key])
                for row, cand, canonical in rows:
                    finish(row, BatchEntry(row, cand.name, cand.smiles, canonical, "failed", outcome.reason or "",
                                           seconds=outcome.seconds))
    except KeyboardInterrupt:
        pass  # everything finished is stored; the rest is reported as "not run"
    finally:
        try:
            store.release(claimed)
        except Exception:  # noqa: BLE001 - a claim left behind only delays another batch
            pass
    for row, cand in enumerate(cands, start=1):
        if row not in entries:
            entries[row] = BatchEntry(row, cand.name, cand.smiles, "", "not run", "interrupted")
    return [entries[r] for r in sorted(entries)]


def write_batch_table(entries: list[BatchEntry], path: str | Path) -> None:
    """The batch summary as CSV (one row per input row, header row first; the caution in
    ``<path>.meta.json``)."""
    from ..files import write_table

    rows = []
    for e in entries:
        bands = []
        for b in list(e.key_bands[:3]) + [None] * (3 - min(3, len(e.key_bands))):
            bands += ["", "", ""] if b is None else [f"{b.wavenumber_cm1:.1f}", f"{b.intensity_km_mol:.1f}", b.label]
        rows.append([e.row, e.name, e.smiles, e.canonical_smiles, e.status, e.reason,
                     "" if e.natoms is None else e.natoms,
                     "" if e.energy_hartree is None else f"{e.energy_hartree:.8f}", f"{e.seconds:.2f}",
                     *bands, ";".join(e.files)])
    write_table(path, ["row", "name", "smiles", "canonical_smiles", "status", "reason", "atoms", "energy_hartree",
                       "seconds", "band1_cm1", "band1_km_mol", "band1_label", "band2_cm1", "band2_km_mol", "band2_label",
                       "band3_cm1", "band3_km_mol", "band3_label", "files"], rows,
                {"what": "vibest batch summary", "caution": CAUTION})
