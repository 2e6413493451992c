"""Ranking candidate structures against one measured spectrum."""

from __future__ import annotations

import csv
import dataclasses
from dataclasses import dataclass
from pathlib import Path
from typing import Callable

from .comparison import SCORES, Comparison, ComparisonOptions, compare, comparison_options
from .errors import InputError, VibestError
from .hydrogen_bonding import with_hydrogen_bonding
from .measured import MeasuredSpectrum, as_measured
from .pipeline import (CAUTION, CalculationOptions, Prediction, SpectrumOptions, analyse, check_cost, compute_record,
                       is_count)
from .store import RecordStore, open_store
from .structure import build_molecule


@dataclass(frozen=True)
class Candidate:
    """A candidate structure: display name and SMILES; ``problem`` says why a row of a
    candidates file could not be read (the candidate then fails alone, with that reason);
    ``decoy_of`` is the SMILES of the structure a generated decoy was made from (vibest.decoys)."""

    name: str
    smiles: str
    problem: str = ""
    decoy_of: str = ""

    @property
    def label(self) -> str:
        """"name (SMILES)"; an unnamed candidate (its name is its SMILES) is "CO (SMILES)", so
        that a bare SMILES such as methanol's "CO" is not read as a name (carbon monoxide)."""
        return self.marked_label()

    def marked_label(self, mark: str = "") -> str:
        """The :attr:`label` with ``mark`` (such as the refined rows' "*") after the name."""
        if self.name == self.smiles:
            return f"{self.smiles}{mark} (SMILES)"
        return f"{self.name}{mark} ({self.smiles})"


#: What each settings argument of the ranking calls must be: (type, None allowed, how to make one).
_SETTINGS_TYPES = {"calc": (CalculationOptions, False, "vibest.calculation_options('gfn2')"),
                   "spec": (SpectrumOptions, False, "vibest.SpectrumOptions(fwhm_cm1=16)"),
                   "options": (ComparisonOptions, True, "vibest.ComparisonOptions(), or its fields as keywords"),
                   "refine_calc": (CalculationOptions, True, "vibest.calculation_options('b3lyp')")}


def check_settings_types(**values) -> None:
    """A one-line InputError for a settings argument of the wrong type (``calc="gfn2"``), which
    would otherwise fail deep inside with an AttributeError."""
    for name, value in values.items():
        kind, optional, how = _SETTINGS_TYPES[name]
        if not (isinstance(value, kind) or (optional and value is None)):
            raise InputError(f"{name} must be a {kind.__name__} ({how}), not {type(value).__name__}")


def check_ranking_settings(calc, spec, options, refine, refine_calc) -> None:
    """The settings of a ranking (:func:`rank_candidates`, vibest.verdict.check_structure) checked
    before any file is read or structure made: their types, and a level to refine with when
    ``refine`` asks for one."""
    check_settings_types(calc=calc, spec=spec, options=options, refine_calc=refine_calc)
    if not is_count(refine):
        raise InputError(f"refine must be a whole number of at least 0, not {refine!r}")
    if refine and refine_calc is None:
        raise InputError("refining needs a level of theory to refine with (refine_calc=vibest.calculation_options('b3lyp'))")


def as_candidates(values, what: str = "candidates") -> list[Candidate]:
    """``values`` as a list of :class:`Candidate`: each a Candidate, a SMILES string (named by
    itself) or a (name, SMILES) pair. A single string, or anything else, is an InputError that
    names the argument or call (``what``)."""
    if isinstance(values, (str, bytes)):
        raise InputError(f"{what}: a list of structures is needed, not one string: write [{values!r}]")
    try:
        values = list(values)
    except TypeError:
        raise InputError(f"{what}: a list of structures is needed, not {type(values).__name__}") from None
    out = []
    for v in values:
        if isinstance(v, Candidate):
            out.append(v)
        elif isinstance(v, str):
            out.append(Candidate(v, v))
        elif isinstance(v, (tuple, list)) and len(v) == 2:
            out.append(Candidate(str(v[0]), str(v[1])))
        else:
            raise InputError(f"{what}: {v!r} is not a structure; give SMILES strings, (name, SMILES) pairs or "
                             "vibest.Candidate objects")
    return out


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
    #: In a refined ranking, the candidate's rank at the first (screening) level.
    screening_rank: int | None = None

    def to_dict(self) -> dict:
        d = {"rank": self.rank, "name": self.candidate.name, "smiles": self.candidate.smiles,
             "decoy_of": self.candidate.decoy_of, "score": self.score,
             "margin_to_next": self.margin_to_next, "error": self.error, "from_store": self.from_store,
             "method": self.method, "refined": self.refined, "screening_rank": self.screening_rank, "note": self.note}
        if self.comparison is not None:
            d["comparison"] = self.comparison.to_dict()
        return d


@dataclass(frozen=True)
class Ranking:
    """Candidates ranked against ``measured``, best first (failed ones last), and the comparison
    options they were scored with. ``refine`` is the K of ``rank_candidates(refine=K)`` (0: not
    refined) and ``screening_method`` the level every candidate was first ranked at."""

    measured: MeasuredSpectrum
    options: ComparisonOptions
    entries: tuple[RankedCandidate, ...]
    refine: int = 0
    screening_method: str = ""

    @property
    def score_name(self) -> str:
        return self.options.score_name

    def to_dict(self) -> dict:
        return {"caution": CAUTION, "measured": self.measured.source, "measured_notes": list(self.measured.notes),
                "score": self.score_name, "screening_method": self.screening_method, "refine": self.refine,
                "candidates": [e.to_dict() for e in self.entries]}

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
                         "yes" if e.refined else "", e.screening_rank or "", e.error or e.note or ""])
        write_table(path, ["rank", "name", "smiles", "score", "margin_to_next", *SCORES, "shift_cm1",
                           "matched_peaks", "measured_peaks", "method", "refined", "screening_rank", "error"], rows,
                    {"what": "vibest ranking", "measured": self.measured.source, "title": self.measured.title,
                     "score": self.score_name, "measured_notes": list(self.measured.notes), "caution": CAUTION})


#: Largest candidates or batch file read (bytes): far beyond any list of structures.
MAX_LIST_BYTES = 20_000_000


def read_candidates(path: str | Path) -> list[Candidate]:
    """Candidates from a file: one per line as ``SMILES [name]``, or CSV with 'smiles' (and
    'name') columns. A byte-order mark, CRLF line ends and comment lines (#) are fine. A row that
    cannot be read (undecodable bytes, an empty SMILES cell) becomes a candidate with a
    ``problem``, so that it fails alone; only a file that cannot be read at all, or that holds no
    candidate, raises InputError."""
    from .files import read_limited

    data = read_limited(path, MAX_LIST_BYTES, "candidates file")
    if data.startswith(b"\xef\xbb\xbf"):
        data = data[3:]
    rows: list[tuple[int, str, str]] = []  # (line number, text, problem)
    for k, raw in enumerate(data.splitlines(), start=1):
        try:
            text, problem = raw.decode("utf-8"), ""
        except UnicodeDecodeError:
            text, problem = raw.decode("utf-8", errors="replace"), f"{path}:{k}: not valid UTF-8 text"
        if text.strip() and not text.lstrip().startswith("#"):
            rows.append((k, text.strip(), problem))
    if not rows:
        raise InputError(f"{path}: no candidates in the file")
    header = [h.strip().lower() for h in next(csv.reader([rows[0][1]]))]
    if "smiles" in header:
        return [_csv_candidate(path, k, text, problem, header) for k, text, problem in rows[1:]] or \
            _no_rows(path)
    return [candidate_of_line(text, problem) for _, text, problem in rows]


def candidate_of_line(text: str, problem: str = "") -> Candidate:
    """'SMILES [name]' (a space ends a SMILES, as in SMILES files) -> Candidate; the name is the
    SMILES when none is given."""
    parts = text.strip().split(None, 1)
    if not parts:
        raise InputError("an empty line is not a candidate")
    return Candidate(parts[1].strip() if len(parts) > 1 else parts[0], parts[0], problem)


def _no_rows(path) -> list[Candidate]:
    raise InputError(f"{path}: a header but no candidates")


def _csv_candidate(path, k: int, text: str, problem: str, header: list[str]) -> Candidate:
    cells = [c.strip() for c in next(csv.reader([text]))]
    get = {h: (cells[i] if i < len(cells) else "") for i, h in enumerate(header)}
    smiles, name = get.get("smiles", ""), get.get("name", "")
    if not problem and not smiles:
        problem = f"{path}:{k}: empty smiles cell"
    return Candidate(name or smiles or f"row {k}", smiles, problem)


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
                out.append(Candidate(f"{d.name} of {c.name}", d.smiles, decoy_of=c.smiles))
    return out


def predict_stored(smiles: str, calc: CalculationOptions, spec: SpectrumOptions, store: RecordStore | None,
                   progress=None, name: str = "") -> tuple[Prediction, bool]:
    """Prediction of ``smiles``, computing the record only when the store has none (and storing it).

    A store that cannot be read or written (read-only, full, locked) never costs the result: the
    prediction says so in a note and is returned."""
    import sqlite3

    spec.validate()
    spec.resolve_scale(calc.engine.method)  # a scale model missing for the method: said before computing
    notes: list[str] = []
    record = None
    if store is not None:
        try:
            record = store.get(smiles, calc)
        except (sqlite3.Error, OSError) as exc:
            notes.append(f"result store {store.path} could not be read ({exc}): computed anew")
    hit = record is not None
    if record is None:
        mol = build_molecule(smiles, seed=calc.seed, largest_fragment=calc.largest_fragment,
                              allow_large=calc.allow_long, start_conformers=calc.start_conformers)
        check_cost(mol, calc)
        record, _, _ = compute_record(mol, calc, progress)
        if store is not None:
            try:
                store.put(smiles, calc, record, name=name)
            except (sqlite3.Error, OSError) as exc:
                notes.append(f"result store {store.path} could not be written ({exc}): this result is not kept")
    return analyse(record, spec, notes=tuple(notes)), hit


def rank_candidates(measured: MeasuredSpectrum | str | Path, candidates: list[Candidate | str], *,
                    calc: CalculationOptions = CalculationOptions(), spec: SpectrumOptions = SpectrumOptions(),
                    store: RecordStore | str | Path | None = None, options: ComparisonOptions | None = None,
                    progress: Callable[[int, int, str], None] | None = None, refine: int = 0,
                    refine_calc: CalculationOptions | None = None, refine_progress=None,
                    **changes) -> Ranking:
    """Predict (or reuse) every candidate, compare it with ``measured`` and rank by score.

    ``measured``: a spectrum or the path of its file; ``candidates``: :class:`Candidate` objects,
    SMILES strings or (name, SMILES) pairs; ``store``: a result store or the path of its SQLite
    file (None: nothing is stored).

    A candidate that cannot be predicted is listed last with its error; it never stops the ranking.
    ``options`` (:class:`vibest.comparison.ComparisonOptions`), with any of its fields given as
    keywords on top (``score_name="pearson"``, ``fit_scale=True``, ...), say how each is compared.
    With ``refine`` K > 0 the best K are then computed again at ``refine_calc`` (a
    density-functional level) and ranked among themselves by their new scores; they keep the
    first K places (scores of two levels are not comparable across the line), and their rows say
    so. A candidate the refining level cannot compute keeps its first-level result, with a note,
    and follows the refined ones (its score is not compared with theirs).
    ``refine_progress(stage, done, total, message)`` hears the stages of each refining calculation
    (minutes each at a density-functional level).
    """
    check_ranking_settings(calc, spec, options, refine, refine_calc)  # before any file is read
    measured, candidates = as_measured(measured), as_candidates(candidates)
    store = None if store is None else open_store(store)
    if not candidates:
        raise InputError("no candidate structures given")
    opts = comparison_options(options, **changes)
    scored, failed = [], []
    for k, cand in enumerate(candidates):
        if progress:
            progress(k, len(candidates), cand.name)
        if cand.problem:
            failed.append(RankedCandidate(None, cand, None, None, None, None, cand.problem, method=calc.method_name))
            continue
        try:
            pred, hit = predict_stored(cand.smiles, calc, spec, store, name=cand.name)
            if opts.computes_hydrogen_bonding(measured):
                pred = with_hydrogen_bonding(pred, calc, store)
            comp = compare(pred, measured, opts)
            scored.append((cand, pred, comp, hit, False, ""))
        except VibestError as exc:
            failed.append(RankedCandidate(None, cand, None, None, None, None, str(exc), method=calc.method_name))
    scored.sort(key=lambda t: -t[2].score)
    screening_ranks = [None] * len(scored)
    if refine:
        scored = _refined(scored[:refine], measured, refine_calc, spec, store, opts, progress,
                          refine_progress) + scored[refine:]
        positions = refined_order(scored, refine, lambda t: t[2].score if t[4] else None)
        scored, screening_ranks = [scored[k] for k in positions], [k + 1 for k in positions]
    if progress:
        progress(len(candidates), len(candidates), "")
    entries = []
    for i, (cand, pred, comp, hit, refined, note) in enumerate(scored):
        nxt = scored[i + 1] if i + 1 < len(scored) else None
        margin = comp.score - nxt[2].score if nxt is not None and nxt[4] == refined else None
        method = refine_calc.method_name if refined else calc.method_name
        entries.append(RankedCandidate(i + 1, cand, comp.score, margin, comp, pred, None, hit, method, refined, note,
                                       screening_ranks[i]))
    return Ranking(measured, opts, tuple(entries + failed), refine, calc.method_name)


def refined_order(items: list, refine: int, new_score: Callable) -> list[int]:
    """How a refined ranking is ordered, as positions in ``items`` (best first at the screening
    level): the first ``refine`` by ``new_score(item)`` (their score at the refining level),
    then those of them it gives None (not refined: their score is not compared with the
    others'), in screening order, then the rest. One rule for ``rank_candidates`` and the
    benchmarks that mirror it."""
    head = items[:refine]
    new = [new_score(item) for item in head]
    done = sorted((k for k in range(len(head)) if new[k] is not None), key=lambda k: -new[k])
    return done + [k for k in range(len(head)) if new[k] is None] + list(range(len(head), len(items)))


def _refined(top, measured, calc, spec, store, opts: ComparisonOptions, progress, stage_progress=None):
    """The entries ``top`` recomputed at ``calc`` (a failure keeps the entry as it was)."""
    out = []
    for k, (cand, pred, comp, hit, _, _) in enumerate(top):
        if progress:
            progress(k, len(top), f"{cand.name} at {calc.method_name}")
        try:
            better, hit2 = predict_stored(cand.smiles, calc, spec, store, stage_progress)
            if getattr(pred, "hydrogen_bonding", None) is not None:  # the first level's cluster (a
                better = dataclasses.replace(better, hydrogen_bonding=pred.hydrogen_bonding)  # DFT one: hours)
        except VibestError as exc:
            out.append((cand, pred, comp, hit, False, f"not refined: {exc}"))
            continue
        out.append((cand, better, compare(better, measured, opts), hit2, True, ""))
    return out
