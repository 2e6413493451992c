"""Hydrogen bonding in a condensed phase, computed on small clusters (structure -> calculation ->
analysis).

In a neat liquid or solid, O-H and N-H groups donate hydrogen bonds: their stretching bands move
down by hundreds of cm^-1, grow several-fold and broaden, and a carbonyl that accepts one moves
down too (common practice). vibest does not paint these changes on; it computes them with the
same level of theory as the monomer, on the smallest cluster that shows them:

* a carboxylic acid: the cyclic dimer (two O-H...O=C bonds, as acids are found in liquids and
  solids, common practice);
* any other molecule with an O-H or N-H donor: an open chain of three copies, A -> B -> C (each
  donor H of one copy bonded to an acceptor of the next: a carbonyl O if the molecule has one,
  else the donor's own O or N); molecules of more than :data:`TRIMER_MAX_ATOMS` / 3 atoms get
  a dimer (A -> B).

The copies that end up hydrogen-bonded are read (in a chain, B both accepts and donates, as the
molecules of a hydrogen-bonded liquid do; chains of alcohols often close into a ring, where every
copy does). The copies are placed as rigid bodies from the monomer's own optimised geometry (the lowest
conformer the monomer record found): the acceptor atom on the line of the donor's X-H bond,
:data:`START_H_BOND_ANGSTROM` from the H, its lone-pair side facing it, turned about that line to
the least crowded of 12 orientations; the cluster is then optimised and its Hessian computed like
any record (seeded, stored under the cluster's own key).

The analysis compares *local stretches*: for a bond i-j, the mass-weighted unit vector of the
bond stretch l; its share in normal mode k is (l . q_k)^2 (the shares sum to 1) and its local
wavenumber is the share-weighted root mean square of the mode wavenumbers, i.e. sqrt(l^T H l) in
wavenumber units, which does not depend on how the stretch mixes with other modes. The change of
a group's stretch is its local wavenumber in the cluster, averaged over the copies where the
group is hydrogen-bonded, minus that in the monomer (unscaled, same level), and the ratio of the
share-weighted intensities.
:mod:`vibest.condensed_phase` applies the changes to the monomer's scaled bands.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from .calculation.record import HessianRecord, record_molecule
from .errors import InputError

#: Start distance H...acceptor of a hydrogen bond (Angstrom): typical O-H...O bonds are 1.8-2.0
#: Angstrom (common practice); the optimisation sets the final value.
START_H_BOND_ANGSTROM = 1.9
#: Largest cluster computed as a chain of three (atoms); larger molecules get a dimer.
TRIMER_MAX_ATOMS = 60
#: Largest monomer (atoms) for which a cluster is computed at all (a dimer of 2 x 45 atoms).
CLUSTER_MAX_MONOMER_ATOMS = 45
#: Longest H...acceptor distance (Angstrom) counted as a hydrogen bond in an optimised cluster.
H_BOND_MAX_ANGSTROM = 2.5
#: Closest approach (Angstrom) of two atoms of different copies in a start geometry.
MIN_START_CONTACT_ANGSTROM = 1.6

ACID = "[CX3](=O)[OX2H1]"
DONOR_ELEMENTS = {7: "N-H", 8: "O-H"}


@dataclass(frozen=True)
class ClusterPlan:
    """How a cluster of ``copies`` copies of a monomer is built and read.

    Attributes:
        kind: "acid dimer", "chain trimer" or "chain dimer".
        copies: number of copies of the monomer.
        links: hydrogen bonds to build, (donor copy, H atom, X atom, acceptor copy, acceptor atom);
            atom indices are the monomer's.
        acceptor: the accepting atom (monomer index).
    """

    kind: str
    copies: int
    links: tuple[tuple[int, int, int, int, int], ...]
    acceptor: int


@dataclass(frozen=True)
class StretchChange:
    """What hydrogen bonding does to one group's stretch (bonded copies of the cluster against the monomer).

    Attributes:
        group: "O-H", "N-H" (donor stretches) or "C=O" (an accepting carbonyl).
        atoms: the bond's two atoms (monomer indices; H or O second).
        monomer_cm1: local harmonic wavenumber in the monomer, cm^-1 (unscaled).
        cluster_cm1: the same in the cluster, mean over the bonded copies, cm^-1 (unscaled).
        intensity_ratio: share-weighted IR intensity, cluster over monomer.
        h_bond_angstrom: the mean H...acceptor distance in the cluster (donors), else None.
    """

    group: str
    atoms: tuple[int, int]
    monomer_cm1: float
    cluster_cm1: float
    intensity_ratio: float
    h_bond_angstrom: float | None = None

    @property
    def shift_cm1(self) -> float:
        """Cluster minus monomer, cm^-1 (negative: down)."""
        return self.cluster_cm1 - self.monomer_cm1


@dataclass(frozen=True)
class HydrogenBonding:
    """Computed hydrogen-bond changes of a molecule's stretches (see the module docstring).

    Attributes:
        kind: the cluster used ("acid dimer", "chain trimer", "chain dimer").
        changes: one :class:`StretchChange` per group read.
        cluster_smiles: the cluster's SMILES (copies joined by '.').
        cluster_energy_hartree: electronic energy of the optimised cluster, Eh.
        binding_kcal_mol: cluster energy minus copies x monomer energy, kcal/mol (no zero-point
            or basis-set corrections: a rough figure).
    """

    kind: str
    changes: tuple[StretchChange, ...]
    cluster_smiles: str
    cluster_energy_hartree: float
    binding_kcal_mol: float

    def change(self, group: str) -> StretchChange | None:
        return next((c for c in self.changes if c.group == group), None)

    def describe(self) -> str:
        parts = [f"{c.group} stretch {c.shift_cm1:+.0f} cm^-1, intensity x{c.intensity_ratio:.1f}" for c in self.changes]
        return f"hydrogen bonding computed on the {self.kind}: " + "; ".join(parts)


# -- structure stage ----------------------------------------------------------------------------

def plan_cluster(record: HessianRecord) -> ClusterPlan | None:
    """The cluster for ``record``'s molecule, or None when it has no O-H or N-H donor (or is an
    ion or radical, or too large: :data:`CLUSTER_MAX_MONOMER_ATOMS`)."""
    from rdkit import Chem

    if record.charge or record.uhf or record.natoms > CLUSTER_MAX_MONOMER_ATOMS:
        return None
    mol = record_molecule(record)
    acid = mol.GetSubstructMatches(Chem.MolFromSmarts(ACID))
    if acid:
        c, o_double, o_h = acid[0]
        h = _hydrogen_on(mol, o_h)
        return ClusterPlan("acid dimer", 2, ((0, h, o_h, 1, o_double), (1, h, o_h, 0, o_double)), o_double)
    donors = [(a.GetIdx(), _hydrogen_on(mol, a.GetIdx())) for a in mol.GetAtoms()
              if a.GetAtomicNum() in DONOR_ELEMENTS and a.GetTotalNumHs(includeNeighbors=True) > 0]
    if not donors:
        return None
    x, h = sorted(donors, key=lambda d: -mol.GetAtomWithIdx(d[0]).GetAtomicNum())[0]  # O-H before N-H
    carbonyl = [a.GetIdx() for a in mol.GetAtoms() if a.GetAtomicNum() == 8 and a.GetDegree() == 1
                and any(b.GetBondTypeAsDouble() == 2.0 for b in a.GetBonds())]
    acceptor = carbonyl[0] if carbonyl else x
    if 3 * record.natoms <= TRIMER_MAX_ATOMS:
        return ClusterPlan("chain trimer", 3, ((0, h, x, 1, acceptor), (1, h, x, 2, acceptor)), acceptor)
    return ClusterPlan("chain dimer", 2, ((0, h, x, 1, acceptor),), acceptor)


def _hydrogen_on(mol, heavy: int) -> int:
    return next(n.GetIdx() for n in mol.GetAtomWithIdx(heavy).GetNeighbors() if n.GetAtomicNum() == 1)


def cluster_positions(record: HessianRecord, plan: ClusterPlan) -> np.ndarray:
    """Start geometry of the cluster (copies x N, 3), Angstrom (see the module docstring)."""
    mono = record.positions_angstrom - record.positions_angstrom.mean(axis=0)
    copies: dict[int, np.ndarray] = {0: mono.copy()}
    if plan.kind == "acid dimer":
        _, h, x, _, o = plan.links[0]
        e = _unit(mono[h] - mono[x])
        centre = (mono[h] + START_H_BOND_ANGSTROM * e + mono[o]) / 2.0
        copies[1] = 2.0 * centre - mono  # the centrosymmetric dimer
        return np.vstack([copies[0], copies[1]])
    for donor_copy, h, x, acceptor_copy, y in plan.links:
        donor = copies[donor_copy]
        e = _unit(donor[h] - donor[x])
        target = donor[h] + START_H_BOND_ANGSTROM * e
        lone_pair = _lone_pair_direction(record, mono, y)
        base = _rotation_taking(lone_pair, -e)
        placed = np.vstack(list(copies.values()))
        best, best_gap = None, -1.0
        for angle in np.linspace(0.0, 2.0 * np.pi, 12, endpoint=False):
            rot = _rotation_about(e, angle) @ base
            trial = (mono - mono[y]) @ rot.T + target
            gap = np.min(np.linalg.norm(trial[:, None] - placed[None], axis=-1))
            if gap > best_gap:
                best, best_gap = trial, gap
        copies[acceptor_copy] = best
    return np.vstack([copies[k] for k in range(plan.copies)])


def _lone_pair_direction(record: HessianRecord, x: np.ndarray, atom: int) -> np.ndarray:
    neighbours = [j if i == atom else i for i, j, _ in record.bonds if atom in (i, j)]
    if not neighbours:
        return np.array([1.0, 0.0, 0.0])
    return _unit(-sum(_unit(x[n] - x[atom]) for n in neighbours))


def _unit(v: np.ndarray) -> np.ndarray:
    n = np.linalg.norm(v)
    return v / n if n > 1e-12 else np.array([1.0, 0.0, 0.0])


def _rotation_taking(a: np.ndarray, b: np.ndarray) -> np.ndarray:
    """Rotation matrix taking unit vector a onto unit vector b."""
    a, b = _unit(a), _unit(b)
    v, c = np.cross(a, b), float(np.dot(a, b))
    if np.linalg.norm(v) < 1e-9:
        if c > 0:
            return np.eye(3)
        perp = _unit(np.cross(a, [1.0, 0.0, 0.0] if abs(a[0]) < 0.9 else [0.0, 1.0, 0.0]))
        return _rotation_about(perp, np.pi)
    k = np.array([[0.0, -v[2], v[1]], [v[2], 0.0, -v[0]], [-v[1], v[0], 0.0]])
    return np.eye(3) + k + k @ k / (1.0 + c)


def _rotation_about(axis: np.ndarray, angle: float) -> np.ndarray:
    u = _unit(axis)
    k = np.array([[0.0, -u[2], u[1]], [u[2], 0.0, -u[0]], [-u[1], u[0], 0.0]])
    return np.eye(3) + np.sin(angle) * k + (1.0 - np.cos(angle)) * k @ k


def cluster_molecule(record: HessianRecord, plan: ClusterPlan):
    """The cluster as a :class:`vibest.structure.Molecule` (copies of the monomer's atoms and
    bonds, in copy order), ready for :func:`vibest.calculation.driver.compute_record`."""
    from rdkit import Chem

    from .structure import Molecule

    n = record.natoms
    positions = cluster_positions(record, plan)
    contacts = np.linalg.norm(positions[:, None] - positions[None], axis=-1)
    same = np.kron(np.eye(plan.copies), np.ones((n, n))).astype(bool)
    if np.min(np.where(same, np.inf, contacts)) < MIN_START_CONTACT_ANGSTROM:
        raise InputError(f"{record.smiles}: no clash-free start geometry for its hydrogen-bonded {plan.kind}")
    mono = record_molecule(record)
    combined = mono
    for _ in range(plan.copies - 1):
        combined = Chem.CombineMols(combined, mono)
    conf = Chem.Conformer(combined.GetNumAtoms())
    for i, p in enumerate(positions):
        conf.SetAtomPosition(i, p.tolist())
    combined = Chem.Mol(combined)
    combined.RemoveAllConformers()
    combined.AddConformer(conf, assignId=True)
    bonds = tuple((i + k * n, j + k * n, o) for k in range(plan.copies) for i, j, o in record.bonds)
    return Molecule(smiles=cluster_smiles(record, plan), numbers=np.tile(record.numbers, plan.copies),
                    positions_angstrom=positions, charge=0, uhf=0, bonds=bonds,
                    symbols=tuple(a.GetSymbol() for a in combined.GetAtoms()),
                    molblock=Chem.MolToMolBlock(combined),
                    notes=(f"hydrogen-bonded {plan.kind} of {record.smiles}",),
                    mass_numbers=tuple(record.mass_numbers) * plan.copies)


def cluster_smiles(record: HessianRecord, plan: ClusterPlan) -> str:
    return ".".join([record.smiles] * plan.copies)


# -- analysis stage -----------------------------------------------------------------------------

def record_modes(record: HessianRecord):
    """Unscaled harmonic analysis of ``record`` with its own masses (isotopes named in its SMILES)."""
    from .analysis.harmonic import harmonic_analysis

    return harmonic_analysis(record.numbers, record.positions_angstrom, record.hessian_hartree_bohr2,
                             record.dipole_derivatives_e, masses_amu=record.masses_amu, charge=record.charge)


def local_stretch(modes, positions_angstrom, i: int, j: int) -> tuple[float, float]:
    """(local harmonic wavenumber in cm^-1, share-weighted IR intensity in km/mol) of the stretch
    of bond i-j, from ``modes`` (:func:`record_modes`) at ``positions_angstrom`` (see the module
    docstring)."""
    from .analysis.harmonic import stretch_shares

    share = stretch_shares(modes, positions_angstrom, i, j)
    nu = modes.wavenumbers_cm1
    mean_square = float(share @ (np.sign(nu) * nu ** 2))
    intensity = float(share @ modes.intensities_km_mol) if modes.intensities_km_mol is not None else 0.0
    return float(np.sign(mean_square) * np.sqrt(abs(mean_square))), intensity


def hydrogen_bond_changes(monomer: HessianRecord, cluster: HessianRecord, plan: ClusterPlan) -> HydrogenBonding:
    """The stretch changes, averaged over the copies where the group is hydrogen-bonded in the
    optimised cluster (H within :data:`H_BOND_MAX_ANGSTROM` of an O or N of another copy; see the
    module docstring)."""
    from ase.units import Hartree, kcal, mol

    _, h, x, _, _ = plan.links[0]
    groups = [(DONOR_ELEMENTS[int(monomer.numbers[x])], x, h, h)]
    carbonyl = _carbon_of_carbonyl(monomer, plan.acceptor)
    if carbonyl is not None:
        groups.append(("C=O", carbonyl, plan.acceptor, plan.acceptor))
    changes = []
    free_modes, bonded_modes = record_modes(monomer), record_modes(cluster)
    for name, i, j, contact in groups:
        bonded = _bonded_copies(monomer, cluster, plan, contact, donor=name != "C=O")
        if not bonded:
            continue
        nu_m, i_m = local_stretch(free_modes, monomer.positions_angstrom, i, j)
        n = monomer.natoms
        per_copy = [(local_stretch(bonded_modes, cluster.positions_angstrom, k * n + i, k * n + j), d)
                    for k, d in bonded]
        nu_c = float(np.mean([p[0][0] for p in per_copy]))
        i_c = float(np.mean([p[0][1] for p in per_copy]))
        distance = float(np.mean([d for _, d in per_copy])) if name != "C=O" else None
        changes.append(StretchChange(name, (i, j), nu_m, nu_c, i_c / i_m if i_m > 1e-6 else float("nan"), distance))
    binding = (cluster.energy_hartree - plan.copies * monomer.energy_hartree) * Hartree / (kcal / mol)
    return HydrogenBonding(plan.kind, tuple(changes), cluster.smiles, float(cluster.energy_hartree), float(binding))


def _bonded_copies(monomer: HessianRecord, cluster: HessianRecord, plan: ClusterPlan, atom: int,
                   donor: bool) -> list[tuple[int, float]]:
    """(copy, distance in Angstrom) of the copies whose ``atom`` takes part in a hydrogen bond with
    another copy: a donor H near an O or N, an acceptor near an H bonded to O or N."""
    n = monomer.natoms
    x = cluster.positions_angstrom
    if donor:
        partners = [k * n + a for k in range(plan.copies) for a in range(n) if int(monomer.numbers[a]) in DONOR_ELEMENTS]
    else:
        heavy = _heavy_donors(monomer)
        polar_h = {j if i in heavy else i for i, j, _ in monomer.bonds
                   if (i in heavy and int(monomer.numbers[j]) == 1) or (j in heavy and int(monomer.numbers[i]) == 1)}
        partners = [k * n + a for k in range(plan.copies) for a in polar_h]
    out = []
    for k in range(plan.copies):
        others = [p for p in partners if p // n != k]
        if others:
            d = float(np.min(np.linalg.norm(x[others] - x[k * n + atom], axis=-1)))
            if d <= H_BOND_MAX_ANGSTROM:
                out.append((k, d))
    return out


def _heavy_donors(record: HessianRecord) -> set[int]:
    return {a for a in range(record.natoms) if int(record.numbers[a]) in DONOR_ELEMENTS}


def _carbon_of_carbonyl(record: HessianRecord, oxygen: int) -> int | None:
    if int(record.numbers[oxygen]) != 8:
        return None
    for i, j, order in record.bonds:
        if oxygen in (i, j) and float(order) == 2.0:
            other = j if i == oxygen else i
            if int(record.numbers[other]) == 6:
                return int(other)
    return None


# -- calculation stage --------------------------------------------------------------------------

def compute_hydrogen_bonding(monomer: HessianRecord, calc, store=None, progress=None) -> HydrogenBonding | None:
    """Build, compute (or fetch from ``store``) and read the cluster of ``monomer``'s molecule;
    None when it has no donor (:func:`plan_cluster`). ``calc``: the monomer's calculation options."""
    import dataclasses
    import sqlite3

    from .calculation.driver import compute_record
    from .store import structure_identity

    plan = plan_cluster(monomer)
    if plan is None:
        return None
    options = dataclasses.replace(calc, start_conformers=False, largest_fragment=False)
    smiles = cluster_smiles(monomer, plan)
    canonical, inchikey = structure_identity(monomer.smiles)
    identity = (".".join([canonical] * plan.copies), f"hydrogen-bonded {plan.kind}:{inchikey}")
    record = None
    if store is not None:
        try:
            record = store.get_by_key(store.key_of(*identity, options))
        except (sqlite3.Error, OSError):
            record = None
    if record is None:
        record, _, _ = compute_record(cluster_molecule(monomer, plan), options, progress)
        if store is not None:
            try:
                store.put(smiles, options, record, identity=identity, name=f"hydrogen-bonded {plan.kind}")
            except (sqlite3.Error, OSError):
                pass  # the result is still used; the store's own notes say when it cannot be written
    return hydrogen_bond_changes(monomer, record, plan)


#: How a prediction's notes say that its cluster failed (:func:`with_hydrogen_bonding`).
NOT_COMPUTED = "hydrogen bonding not computed"


def cluster_skipped(record: HessianRecord) -> str | None:
    """Why a molecule with an O-H or N-H donor gets no cluster (an ion, a radical, too large), or
    None (it gets one, or has no donor)."""
    polar = {frozenset((1, z)) for z in DONOR_ELEMENTS}
    if not any(frozenset((int(record.numbers[i]), int(record.numbers[j]))) in polar for i, j, _ in record.bonds):
        return None
    if record.charge or record.uhf:
        return "an ion or radical gets no hydrogen-bonded cluster"
    if record.natoms > CLUSTER_MAX_MONOMER_ATOMS:
        return f"{record.natoms} atoms: clusters are computed up to {CLUSTER_MAX_MONOMER_ATOMS}"
    return None


def needs_hydrogen_bonding(pred) -> bool:
    """Whether ``pred`` (a prediction or an ensemble) has a donor a cluster would be computed for
    and carries no hydrogen-bonding result yet."""
    first = pred.first_prediction
    return first.hydrogen_bonding is None and plan_cluster(first.record) is not None


def with_hydrogen_bonding(pred, calc, store=None, progress=None):
    """``pred`` (a prediction or an ensemble) carrying its computed hydrogen bonding (computed on
    the lowest conformer's record and shared by an ensemble's members); unchanged when the
    molecule has no donor or already carries it. The cluster is computed at ``calc``'s level
    (the monomer's calculation options) and kept in ``store``. A cluster that cannot be built or
    computed never costs the prediction: it comes back unchanged but for a note
    (:data:`NOT_COMPUTED` and the reason), which a condensed comparison repeats."""
    import dataclasses

    from .errors import VibestError

    if not needs_hydrogen_bonding(pred):
        return pred
    first = pred.first_prediction
    try:
        hb = compute_hydrogen_bonding(first.record, calc, store, progress)
    except VibestError as exc:
        return dataclasses.replace(pred, notes=tuple(pred.notes) + (f"{NOT_COMPUTED} ({exc})",))
    if hasattr(pred, "members"):
        members = tuple(dataclasses.replace(m, prediction=dataclasses.replace(m.prediction, hydrogen_bonding=hb))
                        for m in pred.members)
        return dataclasses.replace(pred, members=members)
    return dataclasses.replace(pred, hydrogen_bonding=hb)


__all__ = ["ClusterPlan", "HydrogenBonding", "StretchChange", "NOT_COMPUTED", "plan_cluster", "cluster_skipped",
           "cluster_positions", "cluster_molecule", "record_modes", "local_stretch", "hydrogen_bond_changes",
           "compute_hydrogen_bonding", "needs_hydrogen_bonding", "with_hydrogen_bonding"]
