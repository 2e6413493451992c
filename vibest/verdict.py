"""The verdict: is the measured sample the intended structure, and how sure can one be?

The intended structure is ranked against the measured spectrum together with its decoys
(:mod:`vibest.decoys`: isomers and functional-group changes a synthesis could have given) and
any further candidates; the ranking is assessed (:mod:`vibest.confidence`: calibrated
confidence, flags) and the intended structure's functional groups are checked band by band
(:mod:`vibest.evidence`). The conclusion is one of three, in plain words:

* **consistent**: the intended structure ranks first with confidence of at least 0.7, no flag,
  and no group evidence against it;
* **not supported**: another candidate ranks first with confidence of at least 0.7 and no flag,
  or a band the structure needs is missing while another candidate ranks first;
* **inconclusive**: everything else (the reasons are listed).

Nothing here computes more than predictions (stored) and comparisons.
"""

from __future__ import annotations

from dataclasses import dataclass, replace
from pathlib import Path
from typing import Callable

from .calculation.driver import CalculationOptions
from .comparison import ComparisonOptions
from .confidence import LOW_CONFIDENCE, Assessment, assess
from .decoys import Decoy, make_decoys
from .errors import InputError
from .evidence import GroupEvidence, group_evidence
from .measured import MeasuredSpectrum, as_measured
from .ms import CONTRADICTED, MassEvidence, MsCheck
from .pipeline import CAUTION, SpectrumOptions, is_count
from .ranking import Candidate, Ranking, as_candidates, check_ranking_settings, rank_candidates
from .store import RecordStore
from .structure import canonical_smiles

CONSISTENT, NOT_SUPPORTED, INCONCLUSIVE = "consistent", "not supported", "inconclusive"
DEFAULT_DECOYS = 8


@dataclass(frozen=True)
class Verdict:
    """The answer to "is this sample the intended structure?" (see the module docstring).

    Attributes:
        intended: the intended structure (name, SMILES).
        conclusion: "consistent", "not supported" or "inconclusive".
        reasons: the sentences behind the conclusion, most important first.
        ranking: the ranking of the intended structure, its decoys and further candidates.
        assessment: confidence of the ranking's first candidate and its flags.
        evidence: functional-group evidence for the intended structure.
        decoys: the decoys that were ranked (with why each was made).
        mass_checks: each candidate against the mass evidence, when given (:mod:`vibest.ms`).
        dropped: candidates left out because the mass evidence contradicts them (``drop``).
    """

    intended: Candidate
    conclusion: str
    reasons: tuple[str, ...]
    ranking: Ranking
    assessment: Assessment
    evidence: tuple[GroupEvidence, ...]
    decoys: tuple[Decoy, ...]
    mass_checks: tuple[MsCheck, ...] = ()
    dropped: tuple[MsCheck, ...] = ()

    @property
    def intended_rank(self) -> int | None:
        for e in self.ranking.entries:
            if e.candidate == self.intended:
                return e.rank
        return None

    def to_dict(self) -> dict:
        return {"caution": CAUTION, "intended": {"name": self.intended.name, "smiles": self.intended.smiles},
                "conclusion": self.conclusion, "reasons": list(self.reasons), "intended_rank": self.intended_rank,
                "assessment": self.assessment.to_dict(), "evidence": [e.to_dict() for e in self.evidence],
                "decoys": [{"smiles": d.smiles, "reason": d.reason} for d in self.decoys],
                "mass_checks": [c.to_dict() for c in self.mass_checks],
                "dropped_by_mass": [c.to_dict() for c in self.dropped],
                "ranking": self.ranking.to_dict()}


def check_structure(measured: MeasuredSpectrum | str, smiles: str, *, name: str | None = None,
                    decoys: int = DEFAULT_DECOYS, candidates: list[Candidate | str] | tuple = (),
                    calc: CalculationOptions = CalculationOptions(), spec: SpectrumOptions = SpectrumOptions(),
                    store: RecordStore | str | Path | None = None,
                    progress: Callable[[int, int, str], None] | None = None,
                    options: ComparisonOptions | None = None, mass_evidence: MassEvidence | None = None,
                    refine: int = 0, refine_calc: CalculationOptions | None = None, refine_progress=None,
                    **changes) -> Verdict:
    """Judge whether ``measured`` is the structure ``smiles`` (see the module docstring).

    ``measured``: a spectrum or the path of its file; ``store``: a result store or the path of
    its SQLite file (None: nothing is stored); ``decoys``: how many generated decoys to
    rank with it; ``candidates``: further structures to rank (as :func:`vibest.ranking.rank_candidates` takes them); ``options`` (:class:`vibest.comparison.ComparisonOptions`, any field also as a keyword)
    say how each is compared (and the confidence is given only for the settings it was calibrated for).
    ``mass_evidence``: a mass spectrum, formula or mass (:class:`vibest.ms.MassEvidence`); each
    candidate is checked against it, contradicted decoys are dropped when it says so, and an
    intended structure it contradicts is not supported whatever the IR ranking.
    ``refine`` K > 0: the best K are recomputed at ``refine_calc`` (a density-functional level)
    and ranked again, as :func:`vibest.ranking.rank_candidates` does; the confidence, flags and
    group evidence then come from the refined predictions."""
    check_ranking_settings(calc, spec, options, refine, refine_calc)  # before any file is read
    if not is_count(decoys):
        raise InputError(f"decoys must be a whole number of at least 0, not {decoys!r}")
    if not isinstance(smiles, str):
        raise InputError(f"smiles must be a SMILES string, not {type(smiles).__name__}")
    measured, candidates = as_measured(measured), as_candidates(candidates)
    own = canonical_smiles(smiles)
    intended = Candidate(name or smiles, smiles)
    made = tuple(make_decoys(smiles, decoys))
    seen = {own}
    pool = [intended]
    for d in made:
        pool.append(Candidate(d.name, d.smiles, decoy_of=smiles))
        seen.add(d.smiles)
    for c in candidates:
        key = canonical_smiles(c.smiles)
        if key not in seen:
            seen.add(key)
            pool.append(c)
    checks, dropped = mass_evidence.screen(pool, keep=intended.smiles) if mass_evidence else ([], [])
    pool = [c for c in pool if c.smiles not in {d.smiles for d in dropped}]
    ranking = rank_candidates(measured, pool, calc=calc, spec=spec, store=store, progress=progress, options=options,
                              refine=refine, refine_calc=refine_calc, refine_progress=refine_progress, **changes)
    entry = next(e for e in ranking.entries if e.candidate == intended)
    if entry.comparison is None:
        raise InputError(f"the intended structure could not be predicted: {entry.error}")
    assessment = assess(ranking, (refine_calc if refine else calc).method_name, spec.fwhm_cm1)
    if len(pool) == 1:  # no confidence, but the flags of a lone candidate's fit still hold
        assessment = replace(assessment, note="no decoy or other candidate to rank against")
    evidence = tuple(group_evidence(entry.prediction, entry.comparison))
    conclusion, reasons = _conclude(intended, ranking, assessment, evidence)
    mine = next((c for c in checks if c.smiles == intended.smiles), None)
    if mine is not None and mine.status == CONTRADICTED:
        conclusion, reasons = NOT_SUPPORTED, [f"the mass evidence contradicts {intended.name}: {mine.reason}"] + reasons
    return Verdict(intended, conclusion, tuple(reasons), ranking, assessment, evidence, made, tuple(checks),
                   tuple(dropped))


def _conclude(intended: Candidate, ranking: Ranking, assessment: Assessment,
              evidence: tuple[GroupEvidence, ...]) -> tuple[str, list[str]]:
    scored = [e for e in ranking.entries if e.comparison is not None]
    first = scored[0]
    mine = next(e for e in scored if e.candidate == intended)
    against = [e.message for e in evidence if e.against]
    conf = assessment.confidence
    conf_text = f"confidence {conf:.2f}" if conf is not None else "no calibrated confidence"
    flags = [f.message for f in assessment.flags]
    if first.candidate == intended:
        plural = "" if len(scored) == 1 else "s"
        head = f"{intended.name} ranks first of {len(scored)} candidate{plural} (score {mine.score:.3f}, {conf_text})"
        if conf is not None and conf >= LOW_CONFIDENCE and not flags and not against:
            seen = [e.name for e in evidence if e.in_structure and e.status == "seen"]
            support = f"; bands seen: {', '.join(seen)}" if seen else ""
            return CONSISTENT, [head + support]
        return INCONCLUSIVE, [head + (", but:" if flags or against else ": not sure enough")] + flags + against
    head = (f"{intended.name} ranks {mine.rank} of {len(scored)} (score {mine.score:.3f}); "
            f"{first.candidate.name} ({first.candidate.smiles}) fits better (score {first.score:.3f}, {conf_text})")
    missing = [e for e in evidence if e.in_structure and e.status == "missing"]
    if (conf is not None and conf >= LOW_CONFIDENCE and not flags) or missing:
        return NOT_SUPPORTED, [head] + against + flags
    return INCONCLUSIVE, [head + (", but:" if flags or against else ": not sure enough")] + flags + against
