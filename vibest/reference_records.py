"""Hessian records of the reference molecules, as the calibration uses them (expensive stage).

A rigid molecule is computed from its seeded embedding. A flexible one (rotatable bonds, or an
O-H/N-H/S-H rotor) is computed in its lowest GFN2-xTB conformer: the conformer search of
:func:`vibest.ensemble.predict_ensemble` with an energy window of 0, because tabulated gas-phase
fundamentals belong to the most stable conformer (trans 1,2-dichloroethane, Z formic acid, ...).
At a density-functional level the molecule is computed from that GFN2-xTB record's geometry
(re-optimised at the level itself), so every level describes the same conformer.
"""

from __future__ import annotations

from .calculation.driver import DFT_START_ENGINE
from .calculation.methods import without_unused_dft_settings
from .calculation.record import HessianRecord
from .pipeline import CalculationOptions, SpectrumOptions, compute_record

#: The level the reference conformers are found at (GFN2-xTB: density-functional levels start from
#: these records, as every DFT optimisation starts from a GFN2-xTB minimum).
REFERENCE_OPTIONS = CalculationOptions(engine=DFT_START_ENGINE, workers=1)


def reference_record(smiles: str, options: CalculationOptions = REFERENCE_OPTIONS) -> HessianRecord:
    """Record of the most stable conformer of ``smiles`` (see module docstring)."""
    from .calculation.record import structure_of_record
    from .ensemble import EnsembleOptions, predict_ensemble
    from .structure import build_molecule, parse_smiles, rotor_count

    if options.uses_dft:
        base = reference_record(smiles, REFERENCE_OPTIONS)
        record, _, _ = compute_record(structure_of_record(base), options)
        return record
    if rotor_count(parse_smiles(smiles)[0]) == 0:
        record, _, _ = compute_record(build_molecule(smiles, seed=options.seed), options)
        return record
    # the records are what counts here, not the spectrum: a unit factor serves a method that has
    # no fitted scale model yet (a first fit of GFN1-xTB)
    ens = predict_ensemble(smiles, calc=options, spec=SpectrumOptions(scale_factor=1.0),
                           ens=EnsembleOptions(energy_window_kcal=0.0, max_conformers=30))
    return ens.members[0].prediction.record


def computed_with(record: HessianRecord, options: CalculationOptions) -> bool:
    """Whether ``record`` was computed with ``options``' methods (engine and intensity engine):
    a benchmark's cache of records from an older version of a method is stale, never reused."""
    current = without_unused_dft_settings(options.to_dict(), record.numbers)
    stored = without_unused_dft_settings(dict(record.settings), record.numbers)
    return all(stored.get(name) == current.get(name) for name in ("engine", "intensity_engine"))

