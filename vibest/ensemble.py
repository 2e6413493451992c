"""Conformer ensembles: search, tight-binding refinement (the chosen level), Boltzmann-weighted spectrum.

Steps (each documented in README "Flexible molecules"):
1. RDKit ETKDGv3 ensemble, 5 + 10 x (rotatable bonds) conformers, capped by ``max_conformers``;
   MMFF94 (else UFF) relaxation; molecules without rotatable bonds use the single-conformer path.
2. De-duplication: same force-field energy (0.05 kcal/mol) and all-atom RMSD below
   ``rmsd_angstrom`` after symmetry-aware alignment count once; the ``max_refined`` lowest within
   ``mmff_window_kcal`` go on.
3. Optimisation of each at the chosen level (GFN1-xTB by default); de-duplication again (same energy within 0.01 kcal/mol and RMSD
   below 0.1 Angstrom: the same minimum reached twice counts once).
4. Hessians only for conformers within ``energy_window_kcal`` of the lowest.
5. Boltzmann weights w_i = exp(-dE_i / RT) / sum_j exp(-dE_j / RT) at ``temperature_K`` from the
   electronic energies at that level, or from harmonic free energies (``weighting="free-energy"``);
   the ensemble spectrum is sum_i w_i S_i.
"""

from __future__ import annotations

import dataclasses
import time
from dataclasses import dataclass
from typing import Callable

import numpy as np
from ase.units import Bohr
from rdkit import Chem
from rdkit.Chem import rdMolAlign, rdMolDescriptors
from scipy import constants as sc

from .calculation.engine import calculation_threads, make_engine
from .calculation.optimizer import optimize
from .errors import InputError
from .pipeline import (CalculationOptions, Prediction, SpectrumOptions, analyse, compute_record,
                      prediction_thermochemistry)
from .spectrum import Spectrum
from .structure import build_molecule, embed, molecule_from_conformer, parse_smiles, rotor_count

_HARTREE_KCAL = sc.physical_constants["Hartree energy"][0] * sc.N_A / (1000 * sc.calorie)
WEIGHTINGS = ("energy", "free-energy")


@dataclass(frozen=True)
class EnsembleOptions:
    """Conformer search settings (energies in kcal/mol, RMSD in Angstrom, temperature in K)."""

    max_conformers: int = 50
    max_refined: int = 10
    mmff_window_kcal: float = 10.0
    energy_window_kcal: float = 3.0
    rmsd_angstrom: float = 0.2
    temperature_K: float = 298.15
    weighting: str = "energy"

    def validate(self) -> None:
        if self.weighting not in WEIGHTINGS:
            raise InputError(f"weighting must be one of {', '.join(WEIGHTINGS)}")
        if self.max_conformers < 1 or self.max_refined < 1:
            raise InputError("conformer counts must be at least 1")
        if self.temperature_K <= 0 or self.energy_window_kcal < 0:
            raise InputError("temperature must be positive and the energy window not negative")


@dataclass(frozen=True)
class Member:
    """One conformer of the ensemble: its prediction, energy relative to the lowest (kcal/mol),
    Boltzmann weight, and the cost of its calculation."""

    prediction: Prediction
    relative_energy_kcal_mol: float
    weight: float
    gradient_calls: int
    seconds: float

    def to_dict(self) -> dict:
        return {"relative_energy_kcal_mol": self.relative_energy_kcal_mol, "weight": self.weight,
                "gradient_calls": self.gradient_calls, "seconds": self.seconds,
                "energy_hartree": self.prediction.record.energy_hartree,
                "bands": [b.to_dict() for b in self.prediction.bands]}


@dataclass(frozen=True)
class EnsemblePrediction:
    """A Boltzmann-weighted prediction. Offers the attributes comparison needs (``smiles``,
    ``bands``, ``wavenumbers_cm1``, ``intensities_km_mol`` weighted, ``spectrum``)."""

    smiles: str
    members: tuple[Member, ...]
    spectrum: Spectrum
    temperature_K: float
    weighting: str
    found: int
    refined: int
    notes: tuple[str, ...]

    @property
    def first_prediction(self) -> Prediction:
        """The first member's prediction (a single prediction's is itself)."""
        return self.members[0].prediction

    @property
    def scale(self):
        return self.first_prediction.scale

    @property
    def method_name(self) -> str:
        return f"{self.first_prediction.method_name}, {len(self.members)}-conformer ensemble"

    @property
    def medium(self) -> str:
        return self.first_prediction.medium

    def strongest(self, count: int = 5):
        """The strongest bands after weighting (band intensities times their conformer's weight)."""
        weighted = [(m.weight * b.intensity_km_mol, b) for m in self.members for b in m.prediction.bands]
        return [b for _, b in sorted(weighted, key=lambda t: -t[0])[:count]]

    @property
    def bands(self):
        return tuple(b for m in self.members for b in m.prediction.bands)

    @property
    def wavenumbers_cm1(self) -> np.ndarray:
        return np.concatenate([m.prediction.wavenumbers_cm1 for m in self.members])

    @property
    def intensities_km_mol(self) -> np.ndarray:
        return np.concatenate([m.weight * m.prediction.intensities_km_mol for m in self.members])

    def to_dict(self) -> dict:
        return {"smiles": self.smiles, "temperature_K": self.temperature_K, "weighting": self.weighting,
                "conformers_found": self.found, "conformers_refined": self.refined, "notes": list(self.notes),
                "members": [m.to_dict() for m in self.members], "spectrum": self.spectrum.to_dict()}


def boltzmann_weights(relative_energies_kcal_mol, temperature_K: float) -> np.ndarray:
    """exp(-dE/RT) normalised to sum 1 (R from scipy.constants)."""
    e = np.asarray(relative_energies_kcal_mol, float) * 1000 * sc.calorie  # J/mol
    x = -(e - e.min()) / (sc.R * temperature_K)
    w = np.exp(x)
    return w / w.sum()


def _rmsd(mol_a: Chem.Mol, mol_b: Chem.Mol) -> float:
    """All-atom RMSD after the best symmetry-equivalent alignment (hydrogens count: OH rotamers
    such as gauche/trans ethanol differ only in them)."""
    if mol_a.GetNumAtoms() < 3:
        return 0.0
    return float(rdMolAlign.GetBestRMS(mol_a, mol_b, maxMatches=1000))


def predict_ensemble(smiles: str, *, calc: CalculationOptions = CalculationOptions(),
                     spec: SpectrumOptions = SpectrumOptions(), ens: EnsembleOptions = EnsembleOptions(),
                     progress: Callable[[str, int, int, str], None] | None = None) -> EnsemblePrediction:
    """Conformer search, refinement, Hessians and the Boltzmann-weighted spectrum of ``smiles``."""
    ens.validate()
    spec.validate()
    mol_noh, notes = parse_smiles(smiles, largest_fragment=calc.largest_fragment)
    n_rot = rotor_count(mol_noh)
    notes = list(notes)
    if n_rot == 0:
        mol = build_molecule(smiles, seed=calc.seed, largest_fragment=calc.largest_fragment,
                              allow_large=calc.allow_long, start_conformers=False)  # the ensemble searches itself
        t0 = time.perf_counter()
        record, _, n = compute_record(mol, calc, progress)
        pred = analyse(record, spec)
        grads = record.timings["optimization_gradients"] + record.timings["hessian_gradients"]
        member = Member(pred, 0.0, 1.0, grads, time.perf_counter() - t0)
        return EnsemblePrediction(pred.smiles, (member,), pred.spectrum, ens.temperature_K, ens.weighting, 1, 1,
                                  tuple(notes + ["no rotatable bonds: one conformer"]))
    count = min(ens.max_conformers, 5 + 10 * n_rot)
    mol_h = embed(mol_noh, seed=calc.seed, num_conformers=count)
    conf_ids = [c.GetId() for c in mol_h.GetConformers()]
    # force-field energies of the (already relaxed, sorted) conformers
    from rdkit.Chem import AllChem

    if AllChem.MMFFHasAllMoleculeParams(mol_h):
        props = AllChem.MMFFGetMoleculeProperties(mol_h)
        ff_e = [AllChem.MMFFGetMoleculeForceField(mol_h, props, confId=c).CalcEnergy() for c in conf_ids]
    else:
        ff_e = [AllChem.UFFGetMoleculeForceField(mol_h, confId=c).CalcEnergy() for c in conf_ids]
    kept: list[int] = []
    for c, e in zip(conf_ids, ff_e):
        if e - min(ff_e) > ens.mmff_window_kcal:
            continue
        dup = False
        for k in kept:
            if abs(ff_e[conf_ids.index(k)] - e) < 0.05:
                a, b = Chem.Mol(mol_h, confId=c), Chem.Mol(mol_h, confId=k)
                if _rmsd(a, b) < ens.rmsd_angstrom:
                    dup = True
                    break
        if not dup:
            kept.append(c)
        if len(kept) >= ens.max_refined:
            break
    found = len(conf_ids)
    template = molecule_from_conformer(mol_noh, mol_h, kept[0], notes)
    # GFN2-xTB optimisation of every kept conformer
    refined: list[tuple[float, np.ndarray, int, float]] = []
    for idx, c in enumerate(kept):
        if progress:
            progress("conformers", idx, len(kept), f"optimising conformer {idx + 1}/{len(kept)}")
        x = np.array(mol_h.GetConformer(c).GetPositions()) / Bohr
        t0 = time.perf_counter()
        with calculation_threads():
            eng = make_engine(template.numbers, x, template.charge, template.uhf, calc.engine)
            opt = optimize(eng, template.numbers, x, calc.optimizer)
        refined.append((opt.energy_hartree, opt.positions_bohr * Bohr, opt.gradient_calls, time.perf_counter() - t0))
    refined.sort(key=lambda r: r[0])
    unique: list[tuple[float, np.ndarray, int, float]] = []
    for r in refined:
        same = any(abs(r[0] - u[0]) * _HARTREE_KCAL < 0.01
                   and _rmsd(template.with_positions(r[1]).to_rdkit(), template.with_positions(u[1]).to_rdkit()) < 0.1
                   for u in unique)
        if not same:
            unique.append(r)
    e_min = unique[0][0]
    window = [u for u in unique if (u[0] - e_min) * _HARTREE_KCAL <= ens.energy_window_kcal]
    preds = []
    for idx, (e, pos, grads, secs) in enumerate(window):
        if progress:
            progress("conformers", idx, len(window), f"Hessian of conformer {idx + 1}/{len(window)}")
        t0 = time.perf_counter()
        record, _, n = compute_record(template.with_positions(pos), calc, None)
        pred = analyse(record, spec)
        cost = grads + record.timings["optimization_gradients"] + record.timings["hessian_gradients"]
        preds.append((pred, cost, secs + time.perf_counter() - t0))
    energies = np.array([p.record.energy_hartree for p, _, _ in preds])
    if ens.weighting == "free-energy":
        g = np.array([prediction_thermochemistry(p, ens.temperature_K).gibbs_energy_kj_mol for p, _, _ in preds])
        rel = (g - g.min()) / sc.calorie  # kJ/mol -> kcal/mol
    else:
        rel = (energies - energies.min()) * _HARTREE_KCAL
    w = boltzmann_weights(rel, ens.temperature_K)
    members = tuple(Member(p, float(r), float(wi), int(c), float(s)) for (p, c, s), r, wi in zip(preds, rel, w))
    y = sum(m.weight * m.prediction.spectrum.absorption_km_mol_cm1 for m in members)
    first = members[0].prediction.spectrum
    spectrum = dataclasses.replace(first, absorption_km_mol_cm1=np.asarray(y))
    notes.append(f"{found} conformers embedded, {len(kept)} refined with {preds[0][0].method_name}, {len(unique)} distinct minima, "
                 f"{len(window)} within {ens.energy_window_kcal:g} kcal/mol")
    return EnsemblePrediction(members[0].prediction.smiles, members, spectrum, ens.temperature_K, ens.weighting,
                              found, len(kept), tuple(notes))
