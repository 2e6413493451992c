"""The density-functional engine: with orbital_response and hessian_assembly (which take PySCF
objects from it), the only place that talks to PySCF.

Like the tight-binding engines it answers energy (Eh), gradient (Eh/Bohr) and dipole (e*Bohr)
at a geometry (Bohr), restarting every SCF from the last density. It also does analytically
what the tight-binding engines need finite differences for:

* the Hessian (PySCF's analytic RKS Hessian: skeleton Fock derivatives, coupled-perturbed
  Kohn-Sham equations for the nuclear displacements, their contraction; dispersion by PySCF;
  the functional's terms of the assembly contracted per atom pair, :mod:`.hessian_assembly`);
  PySCF's analytic RKS Hessian leaves out the response of the integration grid to the nuclear
  displacements (pyscf/pyscf issues #3339, #3437). For hydrogen to neon that costs little
  (formaldehyde at grid level 2: at most 0.002 Eh/Bohr^2, frequencies within 0.5 cm^-1 of
  finite differences), but for heavier atoms, whose steep core densities sit on the moving grid,
  it is large: 0.17 Eh/Bohr^2 on chlorine at grid level 2, CCl4's bends at 417/468 cm^-1
  instead of about 220/310. The rows of atoms past neon therefore come from central finite
  differences of analytic gradients and SCF dipoles (:data:`HEAVY_ATOM_Z`,
  :data:`FINITE_DIFFERENCE_STEP_BOHR`), which include the grid's motion (tests/test_dft.py);
* the dipole derivatives (atomic polar tensors) from the response to an electric field. With
  h(F) = h + F.r the dipole is mu = -dE/dF, so d mu_a / d X = -d/dF_a (dE/dX): the gradient's
  derivative with respect to the field, from three coupled-perturbed equations (one per field
  direction) instead of 3N:

      d mu_a / d X_x = Z_X delta_xa - Tr[D dr_a/dX_x] - Tr[D^a F^X_x] + Tr[W^a S^X_x]

  with D, D^a the density and its field response, W^a the response of the energy-weighted
  density, F^X the skeleton derivative of the Fock matrix (PySCF's ``make_h1``, shared with
  the Hessian), S^X the overlap derivative and dr_a/dX the derivative of the dipole integrals
  (origin at the coordinate origin, like the dipole). Tested against finite differences of the
  SCF dipole (tests/test_dft.py).

PySCF computes with its own OpenMP threads (and numpy's BLAS): each call runs with
``threads`` of them (default all cores) and at most ``memory_mb`` of memory. Closed-shell
molecules only (restricted Kohn-Sham); no implicit solvent. Elements past krypton (iodine) get
the settings' ``beyond_krypton_basis`` with the effective core potential of that name (PySCF's
analytic Hessian includes the core potential's integrals; their rows are finite differences
anyway, being past neon); the atom's charge in the dipole derivatives is then its effective
one (PySCF's ``atom_charges``).
"""

from __future__ import annotations

import time
from contextlib import contextmanager
from dataclasses import dataclass
from typing import Callable

import numpy as np

from ..errors import CalculationError, InputError
from .engine import Engine, EngineSettings, Evaluation
from .methods import DFTSettings, elements_beyond_krypton
from .orbital_response import orbital_response, pyscf_response
from .hessian_assembly import contracted_partial_hessian, two_electron_problem


#: Atoms with an atomic number above this get their Hessian rows and dipole derivatives from
#: finite differences (module docstring): the missing grid response is small up to neon.
HEAVY_ATOM_Z = 10
#: Central-difference step (Bohr) of those rows, the tight-binding Hessian's step.
FINITE_DIFFERENCE_STEP_BOHR = 0.005


def core_potential_note(numbers, dft: DFTSettings) -> str | None:
    """One line saying which elements were computed with an effective core potential, or None."""
    beyond = elements_beyond_krypton(numbers)
    if not beyond or dft.beyond_krypton_basis is None:
        return None
    return (f"{', '.join(beyond)}: {dft.beyond_krypton_basis} basis set with its effective core potential "
            f"(elements past krypton; the other atoms {dft.basis})")


def atoms_past_neon(numbers) -> list[int]:
    """Indices of the atoms whose rows are finite differences (atomic number > HEAVY_ATOM_Z)."""
    return [a for a, z in enumerate(numbers) if int(z) > HEAVY_ATOM_Z]


@dataclass(frozen=True)
class DFTResources:
    """How a DFT calculation may use the machine (changes no number, so never in a store key).

    Attributes:
        threads: OpenMP/BLAS threads (None: all cores).
        memory_mb: memory PySCF may use (MB; its ``max_memory``).
    """

    threads: int | None = None
    memory_mb: int = 4000


#: progress(step, message) of the long steps of one engine call.
StepProgress = Callable[[str, str], None]


@contextmanager
def _threads(count: int):
    """All of ``count`` threads for PySCF's OpenMP and numpy's BLAS while the block runs."""
    from pyscf import lib
    from threadpoolctl import threadpool_limits

    before = lib.num_threads()
    lib.num_threads(count)
    try:
        with threadpool_limits(limits=count):
            yield
    finally:
        lib.num_threads(before)


class PySCFEngine(Engine):
    """Restricted Kohn-Sham DFT through PySCF (see the module docstring).

    Raises InputError at construction for what the method cannot do: an element the basis set
    lacks, unpaired electrons, an implicit solvent."""

    concurrent = False
    dipole_about_coordinate_origin = True
    analytic_hessian = True

    def __init__(self, numbers, positions_bohr, charge: int = 0, uhf: int = 0,
                 settings: EngineSettings = EngineSettings(), resources: DFTResources = DFTResources()):
        from ..calculation.hessian import default_workers

        if settings.dft is None:
            raise InputError(f"method {settings.method!r} is not a density-functional method")
        if settings.solvent:
            raise InputError(f"implicit solvent is available with the tight-binding methods only, not {settings.method}")
        self.settings = settings
        self.resources = resources
        self.threads = int(resources.threads or default_workers())
        self.numbers = np.asarray(numbers, dtype=int)
        self.charge, self.uhf = int(charge), int(uhf)
        self._start = np.array(positions_bohr, dtype=float)
        self.count = 0
        self.mol = build_pyscf_molecule(self.numbers, self._start, self.charge, self.uhf, settings, resources.memory_mb)
        self._check_hessian_terms()
        self._mf = None
        self._dm = None
        self._positions = None  # where the last SCF ran (Bohr)

    # -- the Engine interface --------------------------------------------------------------
    def evaluate(self, positions_bohr: np.ndarray) -> Evaluation:
        with _threads(self.threads):
            mf = self._scf(positions_bohr)
            try:
                grad = mf.nuc_grad_method().kernel()
            except Exception as exc:
                raise CalculationError(f"{self.settings.method} gradient failed: {exc}") from None
            dipole = _dipole(mf)
        self.count += 1
        return Evaluation(float(mf.e_tot), np.asarray(grad, dtype=float), dipole)

    def copy(self) -> "PySCFEngine":
        return PySCFEngine(self.numbers, self._start, self.charge, self.uhf, self.settings, self.resources)

    def wavefunction(self):
        return None if self._dm is None else self._dm.copy()

    def restart_from(self, wavefunction) -> None:
        self._dm = None if wavefunction is None else np.array(wavefunction)

    @property
    def basis_functions(self) -> int:
        return int(self.mol.nao)

    # -- analytic second derivatives -------------------------------------------------------
    def hessian_and_dipole_derivatives(self, positions_bohr: np.ndarray, progress: StepProgress | None = None,
                                       reference: Evaluation | None = None, dipole_derivatives: bool = True
                                       ) -> tuple[np.ndarray, np.ndarray | None, Evaluation]:
        """Analytic Hessian (3N, 3N) in Eh/Bohr^2, dipole derivatives (3N, 3) in e, and the
        evaluation (energy, gradient, dipole) at ``positions_bohr``. ``reference``: this engine's
        evaluation at ``positions_bohr`` (the optimiser's last); when the last SCF was at those
        positions, that SCF and its gradient are reused instead of computed again.
        ``dipole_derivatives=False`` skips the electric-field response (None is returned in their
        place): for callers that need the Hessian only."""
        def say(step, message=""):
            if progress:
                progress(step, message)

        with _threads(self.threads):
            x = np.asarray(positions_bohr, dtype=float).reshape(-1, 3)
            if reference is not None and self._mf is not None and np.array_equal(self._positions, x):
                mf, grad = self._mf, reference.gradient_hartree_bohr
            else:
                say("SCF", f"{self.basis_functions} basis functions")
                mf = self._scf(x)
                grad = mf.nuc_grad_method().kernel()
            hobj = mf.Hessian()
            hobj.max_memory = self.resources.memory_mb
            hobj.partial_hess_elec = self._assembly(hobj)
            mo_e, mo_c, mo_o = mf.mo_energy, mf.mo_coeff, mf.mo_occ
            atoms = range(self.mol.natm)
            try:
                say("Fock derivatives")
                h1ao = hobj.make_h1(mo_c, mo_o, None, atoms)
                say("coupled-perturbed equations (nuclear displacements)")
                fx = orbital_response(mf)  # None: PySCF's own response
                mo1, mo_e1 = hobj.solve_mo1(mo_e, mo_c, mo_o, h1ao, fx, atoms, self.resources.memory_mb)
                say("Hessian assembly")
                de2 = hobj.hess_elec(mo_e, mo_c, mo_o, mo1=mo1, mo_e1=mo_e1, h1ao=h1ao, atmlst=atoms,
                                     max_memory=self.resources.memory_mb)
                de2 = de2 + hobj.hess_nuc(self.mol, atoms)
                if mf.do_disp():
                    de2 = de2 + hobj.get_dispersion()
                apt = None
                if dipole_derivatives:
                    say("coupled-perturbed equations (electric field)")
                    apt = field_dipole_derivatives(mf, h1ao, fx)
            except Exception as exc:
                raise CalculationError(f"{self.settings.method} Hessian failed: {exc}") from None
            n = self.mol.natm
            hessian = np.asarray(de2).transpose(0, 2, 1, 3).reshape(3 * n, 3 * n)
            evaluation = Evaluation(float(mf.e_tot), np.asarray(grad, dtype=float), _dipole(mf))
        self.count += 1
        hessian = 0.5 * (hessian + hessian.T)
        rows = self.heavy_atom_rows(positions_bohr, say)
        if rows is not None:
            idx, fd_hessian, fd_apt = rows
            hessian = _with_rows(hessian, idx, fd_hessian)
            if apt is not None:
                apt = apt.copy()
                apt[idx] = fd_apt
        return hessian, apt, evaluation

    def _check_hessian_terms(self) -> None:
        """Refuses, before any SCF, Hessian two-electron terms the assembly cannot take this way
        (density-fitted terms need vibest's assembly, which covers LDA and GGA functionals without
        range separation only), so that such a request fails at once, not after an optimisation."""
        dft = self.settings.dft
        if dft.hessian_two_electron == "exact":
            return
        problem = two_electron_problem(make_rks(self.mol, dft, self.resources.memory_mb), dft.hessian_two_electron)
        if problem:
            raise InputError(f"{self.settings.method}: {problem}")

    def _assembly(self, hobj) -> Callable:
        """The Hessian assembly: vibest's (vibest.calculation.hessian_assembly) where it covers the
        functional, else PySCF's own, which has exact two-electron terms only."""
        contracted = contracted_partial_hessian(hobj, self.settings.dft.hessian_two_electron)
        return hobj.partial_hess_elec if contracted is None else contracted

    def heavy_atom_rows(self, positions_bohr: np.ndarray, say: Callable[[str, str], None] | None = None,
                        gradients: bool = True):
        """For the atoms past neon: their coordinates' indices, the Hessian rows (Eh/Bohr^2;
        (k, 3N), None unless ``gradients``) and dipole derivatives (e; (k, 3)) by central finite
        differences at ``positions_bohr``; None when there are no such atoms. The SCF state is
        back at ``positions_bohr``'s density afterwards."""
        heavy = atoms_past_neon(self.numbers)
        if not heavy or self.settings.dft.heavy_atom_rows != "finite-difference":
            return None
        x0 = np.asarray(positions_bohr, dtype=float).reshape(-1)
        idx = np.array([3 * a + k for a in heavy for k in range(3)])
        h = FINITE_DIFFERENCE_STEP_BOHR
        rows, apt = np.zeros((len(idx), x0.size)), np.zeros((len(idx), 3))
        centre = self._dm

        def probe(x):  # (gradient or None, dipole), the SCF started from the centre's density
            self._dm = centre
            if not gradients:
                return None, self._dipole_at(x)
            ev = self.evaluate(x)
            return ev.gradient_hartree_bohr.reshape(-1), ev.dipole_e_bohr

        for r, i in enumerate(idx):
            if say:
                say("finite differences for atoms past neon", f"{r + 1}/{len(idx)} coordinates")
            step = np.zeros_like(x0)
            step[i] = h
            (g_plus, mu_plus), (g_minus, mu_minus) = probe(x0 + step), probe(x0 - step)
            if gradients:
                rows[r] = (g_plus - g_minus) / (2 * h)
            apt[r] = (mu_plus - mu_minus) / (2 * h)
        self._dm = centre
        self.mol.set_geom_(x0.reshape(-1, 3), unit="Bohr")
        return idx, (rows if gradients else None), apt

    def _dipole_at(self, positions_bohr) -> np.ndarray:
        with _threads(self.threads):
            return _dipole(self._scf(positions_bohr))

    def dipole_derivatives(self, positions_bohr: np.ndarray, progress: StepProgress | None = None) -> np.ndarray:
        """Dipole derivatives (3N, 3) in e at ``positions_bohr`` (field response; no Hessian)."""
        with _threads(self.threads):
            if progress:
                progress("SCF", f"{self.basis_functions} basis functions")
            mf = self._scf(positions_bohr)
            try:
                if progress:
                    progress("Fock derivatives", "")
                h1ao = mf.Hessian().make_h1(mf.mo_coeff, mf.mo_occ, None, range(self.mol.natm))
                if progress:
                    progress("coupled-perturbed equations (electric field)", "")
                apt = field_dipole_derivatives(mf, h1ao, orbital_response(mf))
            except Exception as exc:
                raise CalculationError(f"{self.settings.method} dipole derivatives failed: {exc}") from None
        rows = self.heavy_atom_rows(positions_bohr, progress, gradients=False)
        if rows is not None:
            apt[rows[0]] = rows[2]
        return apt

    # -- internals -------------------------------------------------------------------------
    def _scf(self, positions_bohr):
        """Converged RKS object at ``positions_bohr``, started from the last density."""
        x = np.asarray(positions_bohr, dtype=float).reshape(-1, 3)
        self.mol.set_geom_(x, unit="Bohr")
        mf = make_rks(self.mol, self.settings.dft, self.resources.memory_mb)
        try:
            mf.kernel(dm0=self._dm)
        except Exception as exc:
            raise CalculationError(f"{self.settings.method} SCF failed: {exc}") from None
        if not mf.converged:
            mf = mf.newton()  # second-order SCF from where the DIIS run stopped
            mf.kernel(mf.make_rdm1())
            if not mf.converged:
                raise CalculationError(f"{self.settings.method} SCF did not converge")
        self._mf, self._dm, self._positions = mf, mf.make_rdm1(), x.copy()
        return mf


def _with_rows(hessian: np.ndarray, idx: np.ndarray, rows: np.ndarray) -> np.ndarray:
    """``hessian`` with rows and columns ``idx`` replaced by ``rows`` (k, 3N), symmetric (the
    block of two replaced coordinates is the mean of both finite-difference values)."""
    out = hessian.copy()
    out[idx, :] = rows
    out[:, idx] = rows.T
    block = rows[:, idx]
    out[np.ix_(idx, idx)] = 0.5 * (block + block.T)
    return out


def build_pyscf_molecule(numbers, positions_bohr, charge: int, uhf: int, settings: EngineSettings,
                         memory_mb: int = 4000):
    """PySCF ``Mole`` (Bohr, closed shell); InputError for unpaired electrons or an element the
    basis set lacks."""
    import warnings

    from ase.data import chemical_symbols
    from pyscf import gto

    if uhf:
        raise InputError(f"{settings.method} is available for closed-shell molecules only; this one has "
                         f"{uhf} unpaired electron(s): use a tight-binding level (--method gfn1, the default, or gfn2)")
    dft = settings.dft
    atoms = [(chemical_symbols[int(z)], tuple(map(float, p))) for z, p in zip(numbers, np.reshape(positions_bohr, (-1, 3)))]
    basis, ecp = _basis_and_core_potentials(numbers, settings)
    try:
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")  # PySCF suggests basis-set-exchange for a missing basis
            mol = gto.M(atom=atoms, unit="Bohr", basis=basis, ecp=ecp, charge=int(charge), spin=0, verbose=0,
                        max_memory=int(memory_mb))
    except (KeyError, RuntimeError, ValueError) as exc:
        missing = sorted({a for a, _ in atoms if not _basis_has(a, basis if isinstance(basis, str) else basis[a])})
        if missing:
            raise InputError(f"basis set {dft.basis} has no functions for {', '.join(missing)}: "
                             "use a tight-binding level (--method gfn1, the default, or gfn2) for this molecule") from None
        raise InputError(f"PySCF cannot set up this molecule with {dft.basis}: {exc}") from None
    missing = sorted({mol.atom_symbol(i) for i in range(mol.natm) if mol.atom_nshells(i) == 0})
    if missing:
        raise InputError(f"basis set {dft.basis} has no functions for {', '.join(missing)}: "
                         "use a tight-binding level (--method gfn1, the default, or gfn2) for this molecule")
    return mol


def _basis_and_core_potentials(numbers, settings: EngineSettings) -> tuple[str | dict, dict]:
    """PySCF's ``basis`` and ``ecp`` arguments: the method's basis for every element up to
    krypton; past it (elements_beyond_krypton) the ``beyond_krypton_basis`` and the effective
    core potential of that name (def2 basis sets define these elements for use with one, and
    PySCF would run them all-electron unless told: a silently wrong calculation). InputError
    when the method has no such basis."""
    from ase.data import chemical_symbols

    dft = settings.dft
    beyond = elements_beyond_krypton(numbers)
    if not beyond:
        return dft.basis, {}
    if dft.beyond_krypton_basis is None:
        raise InputError(f"{settings.method}: {', '.join(beyond)} would need an effective core potential, which "
                         "this method's settings do not name: use a tight-binding level "
                         "(--method gfn1, the default, or gfn2) for this molecule")
    basis = {chemical_symbols[int(z)]: dft.basis for z in numbers} | {el: dft.beyond_krypton_basis for el in beyond}
    return basis, {el: dft.beyond_krypton_basis for el in beyond}


def _basis_has(symbol: str, basis: str) -> bool:
    import warnings

    from pyscf import gto

    with warnings.catch_warnings():
        warnings.simplefilter("ignore")  # PySCF suggests installing basis-set-exchange
        try:
            return bool(gto.basis.load(basis, symbol))
        except Exception:
            return False


def make_rks(mol, dft: DFTSettings, memory_mb: int):
    """A restricted Kohn-Sham object with the settings (not yet run)."""
    from pyscf import dft as pyscf_dft

    mf = pyscf_dft.RKS(mol)
    mf.xc = dft.functional
    mf.grids.level = int(dft.grid_level)
    mf.conv_tol = float(dft.scf_tolerance_hartree)
    mf.conv_tol_grad = float(np.sqrt(dft.scf_tolerance_hartree)) / 10.0  # orbital gradient: densities, dipoles
    mf.max_memory = int(memory_mb)
    mf.verbose = 0
    if dft.dispersion:
        mf.disp = dft.dispersion
    if dft.density_fitting:
        mf = mf.density_fit()
    return mf


def _dipole(mf) -> np.ndarray:
    """Dipole (e*Bohr) about the coordinate origin (PySCF's dip_moment uses origin 0)."""
    return np.asarray(mf.dip_moment(unit="AU", verbose=0), dtype=float)


def _dipole_integrals(mol) -> np.ndarray:
    with mol.with_common_orig((0.0, 0.0, 0.0)):
        return mol.intor_symmetric("int1e_r", comp=3)


def field_dipole_derivatives(mf, h1ao, fx=None) -> np.ndarray:
    """Atomic polar tensors (3N, 3), e, of a converged closed-shell SCF ``mf`` from the response
    to an electric field (module docstring). ``h1ao``: per atom, the skeleton Fock derivatives
    (3, nao, nao) as PySCF's ``make_h1`` gives them. ``fx``: the response in the orbital basis
    (:func:`vibest.calculation.orbital_response.orbital_response`; None: PySCF's)."""
    from pyscf.scf import cphf

    mol = mf.mol
    nao = mol.nao
    mo_e, mo_c, mo_o = mf.mo_energy, mf.mo_coeff, mf.mo_occ
    occ, vir = mo_o > 0, mo_o == 0
    c_occ, c_vir = mo_c[:, occ], mo_c[:, vir]
    e_occ = mo_e[occ]
    r = _dipole_integrals(mol)  # (3, nao, nao)
    fx = fx or pyscf_response(mf)

    def response_density(u):  # u: (k, nvir, nocc) -> (k, nao, nao), factor 2 for double occupancy
        d = np.einsum("pa,kai,qi->kpq", c_vir, u, c_occ) * 2.0
        return d + d.transpose(0, 2, 1)

    def response(u):  # u: (k, nvir, nocc) -> the response's (k, nmo, nocc) in the orbital basis
        u = u.reshape(-1, c_vir.shape[1], c_occ.shape[1])
        x = np.zeros((len(u), mo_c.shape[1], c_occ.shape[1]))
        x[:, vir] = u
        return fx(x)

    h1vo = np.einsum("pa,kpq,qi->kai", c_vir, r, c_occ)
    u, _ = cphf.solve(lambda u: response(u)[:, vir], mo_e, mo_o, h1vo, None, max_cycle=100, tol=1e-10)
    u = u.reshape(3, c_vir.shape[1], c_occ.shape[1])
    d1 = response_density(u)  # dD/dF_a
    e1 = np.einsum("pi,kpq,qj->kij", c_occ, r, c_occ) + response(u)[:, occ]  # occupied block of dF/dF_a
    cu = np.einsum("pa,kai->kpi", c_vir, u)
    w1 = 2.0 * (np.einsum("pi,kij,qj->kpq", c_occ, e1, c_occ) + np.einsum("kpi,i,qi->kpq", cu, e_occ, c_occ))
    w1 = w1 + 2.0 * np.einsum("pi,i,kqi->kpq", c_occ, e_occ, cu)
    dm = mf.make_rdm1()
    s1 = -mol.intor("int1e_ipovlp", comp=3)  # <d mu / d r | nu>, bra derivative
    with mol.with_common_orig((0.0, 0.0, 0.0)):
        irp = mol.intor("int1e_irp", comp=9).reshape(3, 3, nao, nao)  # [a, x] = <mu| r_a d/dx |nu>
    charges = mol.atom_charges()
    out = np.zeros((mol.natm, 3, 3))
    for atom, (_, _, p0, p1) in enumerate(mol.aoslice_by_atom()):
        for x in range(3):
            s_x = np.zeros((nao, nao))
            s_x[p0:p1] = s1[x, p0:p1]
            s_x = s_x + s_x.T
            dr = np.zeros((3, nao, nao))
            dr[:, :, p0:p1] = -irp[:, x, :, p0:p1]
            dr = dr + dr.transpose(0, 2, 1)
            out[atom, x] = (-np.einsum("pq,kqp->k", dm, dr) - np.einsum("kpq,qp->k", d1, h1ao[atom][x])
                            + np.einsum("kpq,qp->k", w1, s_x))
            out[atom, x, x] += charges[atom]
    return out.reshape(3 * mol.natm, 3)


#: Cost model of :func:`estimated_seconds`: seconds = a * (basis functions / 100) ** b on 2
#: cores, per tier, fitted by ``benchmarks/dft_cost.py --quick`` on this project's 2-core machine
#: (quiet; formaldehyde, acetone, benzene, 32-96 basis functions; intensities 2026-12-03, full
#: 2026-12-04 with vibest's Hessian assembly; larger molecules are an extrapolation, and
#: molecules needing many optimisation steps take longer).
COST_MODEL = {"full": (135.0, 2.58), "intensities": (26.9, 2.51)}
#: Seconds of one SCF with gradient at 100 basis functions on 2 cores, for the finite-difference
#: rows of atoms past neon (6 per atom; scaled like the cube of the basis): measured while
#: patching the benchmark's records, 2026-12-03 (CCl4, C2Cl4, 1,2-dibromoethane: 9-14 s at
#: 86-100 basis functions).
HEAVY_ATOM_EVALUATION_SECONDS = 14.0


def estimated_seconds(basis_functions: int, heavy_atoms: int, tier: str, threads: int = 2) -> float:
    """Rough wall time (s) of a density-functional calculation of this size (``tier``: "full"
    or "intensities"; ``heavy_atoms``: atoms past neon, whose rows are finite differences),
    from :data:`COST_MODEL`, assuming the time divides over threads as it does over the 2
    cores it was measured on. Meant for refusing hopeless requests, not for planning: expect a
    factor of 2 either way."""
    a, b = COST_MODEL[tier]
    size = basis_functions / 100.0
    seconds = a * size ** b + 6 * heavy_atoms * HEAVY_ATOM_EVALUATION_SECONDS * size ** 3
    return seconds * 2.0 / max(1, threads)
