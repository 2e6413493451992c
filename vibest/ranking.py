"""Ranking candidate structures against one measured spectrum."""

from __future__ import annotations

import csv
from dataclasses import dataclass
from pathlib import Path
from typing import Callable

from .comparison import DEFAULT_SCORE, SCORES, Comparison, compare
from .errors import InputError, VibestError
from .measured import MeasuredSpectrum
from .pipeline import CAUTION, CalculationOptions, Prediction, SpectrumOptions, analyse, check_cost, compute_record
from .store import RecordStore
from .structure import build_molecule


@dataclass(frozen=True)
class Candidate:
    """A candidate structure: display name and SMILES."""

    name: str
    smiles: str


@dataclass(frozen=True)
class RankedCandidate:
    """One row of a ranking. ``error`` is set (and score None) when the candidate could not be predicted."""

    rank: int | None
    candidate: Candidate
    score: float | None
    margin_to_next: float | None
    comparison: Comparison | None
    prediction: Prediction | None
    error: str | None = None
    from_store: bool = False
    #: The level of theory of the prediction (its method name), and whether the candidate was
    #: recomputed at a refining level (``rank_candidates(refine=...)``).
    method: str = ""
    refined: bool = False
    note: str = ""

    def to_dict(self) -> dict:
        d = {"rank": self.rank, "name": self.candidate.name, "smiles": self.candidate.smiles, "score": self.score,
             "margin_to_next": self.margin_to_next, "error": self.error, "from_store": self.from_store,
             "method": self.method, "refined": self.refined, "note": self.note}
        if self.comparison is not None:
            d["comparison"] = self.comparison.to_dict()
        return d


@dataclass(frozen=True)
class Ranking:
    measured: MeasuredSpectrum
    score_name: str
    entries: tuple[RankedCandidate, ...]

    def to_dict(self) -> dict:
        return {"caution": CAUTION, "measured": self.measured.source, "measured_notes": list(self.measured.notes),
                "score": self.score_name, "candidates": [e.to_dict() for e in self.entries]}

    def write_csv(self, path: str | Path) -> None:
        """The ranked table (header row first); caution, measured file and score in
        ``<path>.meta.json``."""
        from .files import write_table

        rows = []
        for e in self.entries:
            c = e.comparison
            s = c.scores if c else {}
            n_match = sum(m.matched for m in c.matches) if c else ""
            n_meas = sum(m.measured_cm1 is not None for m in c.matches) if c else ""
            rows.append([e.rank or "", e.candidate.name, e.candidate.smiles,
                         "" if e.score is None else f"{e.score:.4f}",
                         "" if e.margin_to_next is None else f"{e.margin_to_next:.4f}",
                         *(f"{s[k]:.4f}" if k in s else "" for k in SCORES),
                         "" if c is None else f"{c.shift_cm1:.2f}", n_match, n_meas, e.method,
                         "yes" if e.refined else "", e.error or e.note or ""])
        write_table(path, ["rank", "name", "smiles", "score", "margin_to_next", *SCORES, "shift_cm1",
                           "matched_peaks", "measured_peaks", "method", "refined", "error"], rows,
                    {"what": "vibest ranking", "measured": self.measured.source, "title": self.measured.title,
                     "score": self.score_name, "measured_notes": list(self.measured.notes), "caution": CAUTION})


def read_candidates(path: str | Path) -> list[Candidate]:
    """Candidates from a file: one per line as ``SMILES [name]``, or CSV with 'smiles' (and 'name') columns."""
    p = Path(path)
    try:
        text = p.read_text()
    except OSError as exc:
        raise InputError(f"cannot read {path}: {exc.strerror or exc}") from None
    lines = [l for l in text.splitlines() if l.strip() and not l.lstrip().startswith("#")]
    if not lines:
        raise InputError(f"{path}: no candidates in the file")
    out: list[Candidate] = []
    header = [h.strip().lower() for h in lines[0].split(",")]
    if "smiles" in header:
        for k, row in enumerate(csv.DictReader(lines), start=2):
            row = {(key or "").strip().lower(): (v or "").strip() for key, v in row.items()}
            if not row.get("smiles"):
                raise InputError(f"{path}:{k}: empty smiles")
            out.append(Candidate(row.get("name") or row["smiles"], row["smiles"]))
        return out
    for line in lines:
        parts = line.split(None, 1)
        out.append(Candidate(parts[1].strip() if len(parts) > 1 else parts[0], parts[0]))
    return out


def with_decoys(candidates: list[Candidate], per_candidate: int) -> list[Candidate]:
    """``candidates`` followed by up to ``per_candidate`` decoys of each (vibest.decoys), no
    structure twice (by canonical SMILES)."""
    from .decoys import make_decoys
    from .structure import canonical_smiles

    out, seen = list(candidates), {canonical_smiles(c.smiles) for c in candidates}
    for c in candidates:
        for d in make_decoys(c.smiles, per_candidate):
            if d.smiles not in seen:
                seen.add(d.smiles)
                out.append(Candidate(f"{d.name} of {c.name}", d.smiles))
    return out


def predict_stored(smiles: str, calc: CalculationOptions, spec: SpectrumOptions, store: RecordStore | None,
                   progress=None) -> tuple[Prediction, bool]:
    """Prediction of ``smiles``, computing the record only when the store has none (and storing it)."""
    spec.validate()
    spec.resolve_scale(calc.engine.method)  # a scale model missing for the method: said before computing
    record = store.get(smiles, calc) if store is not None else None
    hit = record is not None
    if record is None:
        mol = build_molecule(smiles, seed=calc.seed, largest_fragment=calc.largest_fragment)
        check_cost(mol, calc)
        record, _, _ = compute_record(mol, calc, progress)
        if store is not None:
            store.put(smiles, calc, record)
    return analyse(record, spec), hit


def rank_candidates(measured: MeasuredSpectrum, candidates: list[Candidate], *,
                    calc: CalculationOptions = CalculationOptions(), spec: SpectrumOptions = SpectrumOptions(),
                    store: RecordStore | None = None, score_name: str = DEFAULT_SCORE,
                    progress: Callable[[int, int, str], None] | None = None, refine: int = 0,
                    refine_calc: CalculationOptions | None = None, **compare_options) -> Ranking:
    """Predict (or reuse) every candidate, compare it with ``measured`` and rank by score.

    A candidate that cannot be predicted is listed last with its error; it never stops the ranking.
    ``compare_options`` go to :func:`vibest.comparison.compare` (range_cm1, fit_scale, baseline, ...).
    With ``refine`` K > 0 the best K are then computed again at ``refine_calc`` (a
    density-functional level) and ranked among themselves by their new scores; they keep the
    first K places (scores of two levels are not comparable across the line), and their rows say
    so. A candidate the refining level cannot compute keeps its first-level result, with a note.
    """
    if not candidates:
        raise InputError("no candidate structures given")
    if refine and refine_calc is None:
        raise InputError("refining needs a level of theory to refine with (e.g. --refine-method b3lyp)")
    scored, failed = [], []
    for k, cand in enumerate(candidates):
        if progress:
            progress(k, len(candidates), cand.name)
        try:
            pred, hit = predict_stored(cand.smiles, calc, spec, store)
            comp = compare(pred, measured, score_name=score_name, **compare_options)
            scored.append((cand, pred, comp, hit, False, ""))
        except VibestError as exc:
            failed.append(RankedCandidate(None, cand, None, None, None, None, str(exc), method=calc.method_name))
    scored.sort(key=lambda t: -t[2].score)
    if refine:
        top = _refined(scored[:refine], measured, refine_calc, spec, store, score_name, progress, compare_options)
        scored = sorted(top, key=lambda t: -t[2].score) + scored[refine:]
    if progress:
        progress(len(candidates), len(candidates), "")
    entries = []
    for i, (cand, pred, comp, hit, refined, note) in enumerate(scored):
        nxt = scored[i + 1] if i + 1 < len(scored) else None
        margin = comp.score - nxt[2].score if nxt is not None and nxt[4] == refined else None
        method = refine_calc.method_name if refined else calc.method_name
        entries.append(RankedCandidate(i + 1, cand, comp.score, margin, comp, pred, None, hit, method, refined, note))
    return Ranking(measured, score_name, tuple(entries + failed))


def _refined(top, measured, calc, spec, store, score_name, progress, compare_options):
    """The entries ``top`` recomputed at ``calc`` (a failure keeps the entry as it was)."""
    out = []
    for k, (cand, pred, comp, hit, _, _) in enumerate(top):
        if progress:
            progress(k, len(top), f"{cand.name} at {calc.method_name}")
        try:
            better, hit2 = predict_stored(cand.smiles, calc, spec, store)
        except VibestError as exc:
            out.append((cand, pred, comp, hit, False, f"not refined: {exc}"))
            continue
        out.append((cand, better, compare(better, measured, score_name=score_name, **compare_options), hit2, True, ""))
    return out
