"""Geometry optimiser: rational-function (RFO) quasi-Newton steps with BFGS updates.

Two coordinate systems, the same step logic:

* ``internal`` (default): redundant internal coordinates (bonds, bends, torsions;
  :mod:`vibest.calculation.redundant_internals`; C. Peng, P. Y. Ayala, H. B. Schlegel,
  M. J. Frisch, J. Comput. Chem. 17, 49 (1996)). Steps are taken in the non-redundant
  (delocalised) space spanned by the Wilson B matrix, the Hessian is kept and BFGS-updated in
  the redundant coordinates, and each internal step is turned into Cartesians by the usual
  iterative back-transformation. Molecules the set cannot describe (near-linear bends, tiny
  planar molecules) and geometries that become near-linear fall back to Cartesians.
* ``cartesian``: Cartesian coordinates with translations and rotations projected out.

The start curvature is Lindh's model Hessian (for the internal optimiser, its force constants of
the set's own primitives); a trust radius controls step length from the ratio of actual to predicted energy
change. References: A. Banerjee, N. Adams, J. Simons, R. Shepard, J. Phys. Chem. 89, 52 (1985)
(RFO); J. Nocedal & S. Wright, *Numerical Optimization* (2006), ch. 4 and 6 (trust region, BFGS).
"""

from __future__ import annotations

import time
from dataclasses import asdict, dataclass, field
from typing import Callable, NamedTuple

import numpy as np
from scipy.linalg import blas, lapack

from ..errors import InputError
from ..rigid_body import rigid_body_basis, rigid_body_vectors
from . import redundant_internals
from .engine import Engine, Evaluation
from .model_hessian import lindh_diagonal, lindh_hessian

COORDINATES = ("internal", "cartesian")


@dataclass(frozen=True)
class OptimizerSettings:
    """Convergence and step control.

    Attributes:
        max_force_hartree_bohr: converged when the largest per-atom gradient norm, overall
            translation and rotation projected out, is below this (Eh/Bohr).
        max_steps: give up after this many gradient evaluations.
        trust_radius_bohr: initial trust radius (Bohr, norm of the whole step).
        max_trust_radius_bohr: upper bound of the trust radius (Bohr).
        coordinates: ``"internal"`` (redundant internals, default) or ``"cartesian"``. In
            internals the trust radius bounds the norm of the step in the internal space
            (Bohr and radians).
    """

    max_force_hartree_bohr: float = 5e-5
    max_steps: int = 300
    trust_radius_bohr: float = 0.3
    max_trust_radius_bohr: float = 1.0
    min_trust_radius_bohr: float = 1e-3
    coordinates: str = "internal"

    def to_dict(self) -> dict:
        return asdict(self)


@dataclass(frozen=True)
class OptimizationResult:
    """Outcome of one optimisation.

    Attributes:
        positions_bohr: final geometry (N, 3) in Bohr.
        energy_hartree: final energy (Eh).
        max_force_hartree_bohr: largest per-atom gradient norm at the end (Eh/Bohr).
        converged: whether the force criterion was met.
        gradient_calls: gradient evaluations used.
        seconds: wall time; gradient_seconds: part of it spent inside the engine.
    """

    positions_bohr: np.ndarray
    energy_hartree: float
    max_force_hartree_bohr: float
    converged: bool
    gradient_calls: int
    seconds: float
    gradient_seconds: float
    energies_hartree: list[float] = field(default_factory=list)
    #: The engine's evaluation at ``positions_bohr`` when it was the engine's last one (its
    #: wavefunction is then loaded), else None.
    final_evaluation: Evaluation | None = None
    #: Coordinates the steps were taken in: "internal", "cartesian", or "internal, then cartesian".
    coordinates: str = "cartesian"

    def to_dict(self) -> dict:
        return {
            "coordinates": self.coordinates,
            "energy_hartree": self.energy_hartree,
            "max_force_hartree_bohr": self.max_force_hartree_bohr,
            "converged": self.converged,
            "gradient_calls": self.gradient_calls,
            "seconds": self.seconds,
            "gradient_seconds": self.gradient_seconds,
        }


def _max_atom_force(grad: np.ndarray, positions_bohr: np.ndarray) -> float:
    """Largest per-atom norm (Eh/Bohr) of the gradient with overall translation and rotation
    projected out: an exact gradient has none, but a density-functional gradient on an
    integration grid that does not move with the atoms carries a net force and torque of
    ~1e-4 Eh/Bohr (fluorinated molecules at B3LYP, grid level 2), which no change of shape can
    remove and which kept such optimisations from converging until their last step."""
    g = np.asarray(grad, dtype=float).ravel()
    rigid = rigid_body_basis(np.asarray(positions_bohr, dtype=float).reshape(-1, 3))
    g = g - rigid @ (rigid.T @ g)
    return float(np.linalg.norm(g.reshape(-1, 3), axis=1).max())


#: Curvature given to translations/rotations so that RFO never steps along them (Eh/Bohr^2).
_RIGID_SHIFT = 1e3


def _rfo_solve(w: np.ndarray, v: np.ndarray, grad: np.ndarray) -> np.ndarray:
    """RFO step (Banerjee et al. 1985) for a Hessian with eigenvalues ``w`` and eigenvectors
    ``v`` (columns) and gradient ``grad``, all in one space without redundant directions."""
    if np.all(w > 0):
        w = np.maximum(w, 1e-4)
    gq = v.T @ grad
    aug = np.zeros((len(w) + 1, len(w) + 1))
    aug[:-1, :-1] = np.diag(w)
    aug[:-1, -1] = gq
    aug[-1, :-1] = gq
    _, ev = np.linalg.eigh(aug)
    vec = ev[:, 0]
    step_q = -gq / np.maximum(np.abs(w), 1e-4) if abs(vec[-1]) < 1e-12 else vec[:-1] / vec[-1]
    return v @ step_q


def _rfo_step(hess: np.ndarray, grad: np.ndarray, rigid: np.ndarray, proj: np.ndarray) -> np.ndarray:
    """RFO step in the space orthogonal to the rigid-body vectors ``rigid`` (``proj`` = 1 - rigid rigid^T).

    The projected Hessian P H P gets a large curvature along the rigid-body directions; one
    eigendecomposition then serves both the projection and the augmented-Hessian root.
    """
    h = proj @ hess @ proj + _RIGID_SHIFT * (rigid @ rigid.T)
    w, v = np.linalg.eigh(0.5 * (h + h.T))
    internal = w < 0.5 * _RIGID_SHIFT
    return _rfo_solve(w[internal], v[:, internal], grad)


#: Smallest curvature (Eh/Bohr^2 or Eh/rad^2) of a start Hessian taken from a calculation: a
#: computed Hessian of another method can be nearly flat or slightly negative along soft modes,
#: where a quasi-Newton step would be far too long.
MIN_START_CURVATURE = 0.005


def _floored(hess: np.ndarray) -> np.ndarray:
    """``hess`` with its eigenvalues raised to at least MIN_START_CURVATURE, except those that
    are zero by construction (projected-out or redundant directions, below 1e-8)."""
    w, v = np.linalg.eigh(0.5 * (hess + hess.T))
    keep = np.abs(w) < 1e-8
    w = np.where(keep, w, np.maximum(w, MIN_START_CURVATURE))
    return (v * w) @ v.T


def _bfgs(hess: np.ndarray, step: np.ndarray, y: np.ndarray) -> np.ndarray:
    """BFGS update of ``hess`` (symmetric, C-ordered; updated in place and returned) from a step
    and its gradient change (unchanged when s.y <= 0)."""
    sy = step @ y
    if sy <= 1e-10:
        return hess
    hs = hess @ step
    # two rank-one updates in place (BLAS dger): the transpose of a C-ordered symmetric matrix is
    # the same matrix in Fortran order, so no copy is made
    out = blas.dger(1.0 / sy, y, y, a=hess.T, overwrite_a=1)
    return blas.dger(-1.0 / (step @ hs), hs, hs, a=out, overwrite_a=1).T


def _clip(step: np.ndarray, trust: float) -> tuple[np.ndarray, float]:
    length = float(np.linalg.norm(step))
    if length > trust:
        return step * (trust / length), trust
    return step, length


class _CartesianSteps:
    """Steps in Cartesians (Bohr) with rigid-body motions projected out."""

    name = "cartesian"

    def __init__(self, numbers, x: np.ndarray, g: np.ndarray, hessian: np.ndarray | None = None):
        self.x, self.g = x, g
        if hessian is None:
            self.hess = lindh_hessian(numbers, x)
        else:
            rb = rigid_body_basis(x)
            proj = np.eye(x.size) - rb @ rb.T
            self.hess = np.ascontiguousarray(_floored(proj @ hessian @ proj))

    def propose(self, trust: float):
        n = len(self.x)
        rb = rigid_body_basis(self.x)
        self._proj = np.eye(3 * n) - rb @ rb.T
        gp = self._proj @ self.g
        step, length = _clip(_rfo_step(self.hess, gp, rb, self._proj), trust)
        self._step = step
        return self.x + step.reshape(n, 3), gp @ step + 0.5 * step @ self.hess @ step, length

    def update(self, x_new: np.ndarray, g_new: np.ndarray, accept: bool) -> None:
        self.hess = _bfgs(self.hess, self._step, self._proj @ (g_new - self.g))
        if accept:
            self.x, self.g = x_new, g_new


# LAPACK through scipy.linalg.lapack: the scipy.linalg functions add 10-100 us of argument
# handling per call, as much as the work itself for the optimiser's matrices of 30-200 rows.
def _cholesky_lower(m: np.ndarray) -> np.ndarray:
    """Lower Cholesky factor of a symmetric positive definite matrix (LinAlgError if it is not)."""
    c, info = lapack.dpotrf(m, lower=1)
    if info != 0:
        raise np.linalg.LinAlgError("matrix not positive definite")
    return c


def _cho_solve(c: np.ndarray, b: np.ndarray) -> np.ndarray:
    """x with (c c^T) x = b for a lower Cholesky factor c."""
    return lapack.dpotrs(c, b, lower=1)[0]


def _solve_lower(c: np.ndarray, b: np.ndarray, transposed: bool = False) -> np.ndarray:
    """x with c x = b (or c^T x = b) for a lower triangular c."""
    return lapack.dtrtrs(c, b, lower=1, trans=int(transposed))[0]


def _lowest_eigenvector(a: np.ndarray) -> np.ndarray:
    """Eigenvector of the lowest eigenvalue of a symmetric matrix (LAPACK dsyevr, that one only)."""
    return lapack.dsyevr(a, compute_v=1, range="I", il=1, iu=1)[1][:, 0]


class _Frame(NamedTuple):
    """What a step in internals needs of one geometry: values q (Bohr, rad), Wilson B, the lower
    Cholesky factor of M = B^T B + R R^T, the rigid-body vectors R (3N, 6), the projected
    Cartesian gradient B^T g_q (Eh/Bohr) and the internal gradient g_q."""

    q: np.ndarray
    b: np.ndarray
    chol: np.ndarray
    rigid: np.ndarray
    gx: np.ndarray
    gq: np.ndarray


class _InternalSteps:
    """Steps in the non-redundant space of a redundant internal set (Bohr and radians).

    Internal steps dq = B dx are parametrised by Cartesian steps dx. With the metric
    M = B^T B + R R^T (R: translations and rotations, which B maps to zero), the RFO problem in
    the space spanned by B (Hessian U^T H U, gradient U^T g_q, step length |dq|) is the
    generalised problem [[B^T H B + c R R^T, g], [g^T, 0]] v = lambda [[M, 0], [0, 1]] v with the
    rigid motions given a large curvature c; it is solved from the Cholesky factor L of M as an
    ordinary symmetric problem for y = L^T dx. The generalised inverse of B is then
    B^+ = M^-1 B^T (one Cholesky solve), and the internal gradient g_q = B M^-1 g_x. One Cholesky
    factorisation per geometry replaces the eigendecomposition of B^T B (identical steps, less
    time per step).
    """

    name = "internal"
    #: Back-transformation: iterations and convergence (RMS Cartesian change, Bohr).
    BACK_ITERATIONS, BACK_TOL_BOHR = 25, 1e-5
    #: Smallest Cholesky pivot of B^T B + R R^T of a complete set.
    COMPLETE_PIVOT = 1e-2

    def __init__(self, internal: redundant_internals.InternalSet, numbers, x: np.ndarray, g: np.ndarray,
                 hessian: np.ndarray | None = None):
        self.ic = internal
        self.x, self.g = x, g
        self.frame = self._frame(x, g)
        # Whether the set spans all internal motions: M = B^T B + R R^T positive definite, with no
        # Cholesky pivot below COMPLETE_PIVOT. A planar molecule whose set has no out-of-plane
        # coordinate (formaldehyde: bonds and bends only) has, exactly planar, a pivot of 1.5e-4:
        # steps along that direction came out thousands of Bohr long. Such a set counts as
        # incomplete and the molecule is optimised in Cartesians. (The smallest pivots of the 12
        # molecules of benchmarks/speed.py and 12 small ones, at start and minimum: 0.16-1.1.)
        pivots = np.diag(self.frame.chol) if self.frame is not None else np.zeros(1)
        self.complete = bool(pivots.min() > self.COMPLETE_PIVOT)
        # Lindh's model restricted to the set's own primitives: diagonal and cheap; on the molecules
        # of benchmarks/speed.py it needed as few or fewer gradients than the full Cartesian model
        # transformed to internals
        self.hess = np.diag(lindh_diagonal(numbers, x, internal.bonds, internal.bends, internal.torsions))
        if hessian is not None and self.frame is not None and self.complete:
            # H_q = G^T H_x G with G = M^-1 B^T, the generalised inverse of B (dx = G dq)
            g_inv = _cho_solve(self.frame.chol, self.frame.b.T)
            self.hess = np.ascontiguousarray(_floored(g_inv.T @ hessian @ g_inv))

    def _frame(self, x: np.ndarray, g: np.ndarray) -> _Frame | None:
        """The :class:`_Frame` at ``x``; None when M is not positive definite (the set no longer
        spans every internal motion)."""
        q, bmat = self.ic.values_and_b_matrix(x)
        # R need not be normalised: along R the RFO problem reads c R R^T v = lambda R R^T v
        rigid = rigid_body_vectors(x)
        try:
            chol = _cholesky_lower(bmat.T @ bmat + rigid @ rigid.T)
        except np.linalg.LinAlgError:
            return None
        gq = bmat @ _cho_solve(chol, g)
        return _Frame(q, bmat, chol, rigid, bmat.T @ gq, gq)

    def propose(self, trust: float):
        if self.frame is None:
            return None
        bmat, chol, gx = self.frame.b, self.frame.chol, self.frame.gx
        n = len(gx)
        hx = bmat.T @ self.hess @ bmat
        hx = 0.5 * (hx + hx.T)
        rigid = self.frame.rigid
        w = _solve_lower(chol, hx + _RIGID_SHIFT * (rigid @ rigid.T))
        aug = np.zeros((n + 1, n + 1))
        aug[:n, :n] = _solve_lower(chol, w.T)
        aug[:n, n] = aug[n, :n] = _solve_lower(chol, gx)
        lowest = _lowest_eigenvector(aug)
        y = lowest[:n] / lowest[n] if abs(lowest[n]) > 1e-12 else -aug[:n, n]
        dx = _solve_lower(chol, y, transposed=True)
        dq = bmat @ dx
        length = float(np.linalg.norm(dq))
        if length > trust:
            dx, dq, length = dx * (trust / length), dq * (trust / length), trust
        predicted = gx @ dx + 0.5 * dx @ hx @ dx
        x_new = self._back_transform(dq)
        if x_new is None or self.ic.max_bend_deg(x_new) > redundant_internals.LINEAR_DEG:
            return None
        return x_new, predicted, length

    def _back_transform(self, dq: np.ndarray) -> np.ndarray | None:
        """Cartesians whose internals are q + dq, by x <- x + B^+ (q_target - q(x)) with B^+ of
        the start geometry; the first iterate when the iteration does not converge."""
        bmat, chol = self.frame.b, self.frame.chol
        target = self.frame.q + dq
        x = self.x.ravel().copy()
        first, rest = None, dq
        for _ in range(self.BACK_ITERATIONS):
            dx = _cho_solve(chol, bmat.T @ rest)
            x = x + dx
            if first is None:
                first = x.copy()
            if np.sqrt(np.mean(dx ** 2)) < self.BACK_TOL_BOHR:
                break
            new_rest = self.ic.difference(target, self.ic.values(x.reshape(-1, 3)))
            if np.linalg.norm(new_rest) > np.linalg.norm(rest):
                x = first
                break
            rest = new_rest
        return x.reshape(-1, 3) if np.all(np.isfinite(x)) else None

    def update(self, x_new: np.ndarray, g_new: np.ndarray, accept: bool) -> None:
        new = self._frame(x_new, g_new)
        if new is not None:
            self.hess = _bfgs(self.hess, self.ic.difference(new.q, self.frame.q), new.gq - self.frame.gq)
        if accept:
            self.x, self.g = x_new, g_new
            self.frame = new  # None: the next proposal hands over to Cartesians


def optimize(engine: Engine, numbers, positions_bohr, settings: OptimizerSettings = OptimizerSettings(),
             progress: Callable[[int, float, float], None] | None = None,
             first: Evaluation | None = None, hessian: np.ndarray | None = None) -> OptimizationResult:
    """Minimise the engine's energy from ``positions_bohr``.

    ``progress(step, energy_hartree, max_force)`` is called after each gradient.
    ``first`` may carry an evaluation already made at the start geometry. ``hessian`` (3N, 3N,
    Eh/Bohr^2) is a start curvature at the start geometry instead of Lindh's model (e.g. a
    cheaper method's Hessian when a costly method re-optimises its minimum); its eigenvalues are
    raised to at least :data:`MIN_START_CURVATURE`.
    """
    if settings.coordinates not in COORDINATES:
        raise InputError(f"unknown optimiser coordinates {settings.coordinates!r}; choose one of {', '.join(COORDINATES)}")
    t0 = time.perf_counter()
    tg = 0.0
    x = np.asarray(positions_bohr, dtype=float).copy()
    calls = 0

    def evaluate(pos):
        nonlocal tg, calls
        t = time.perf_counter()
        ev = engine.evaluate(pos)
        tg += time.perf_counter() - t
        calls += 1
        return ev

    ev = first if first is not None else evaluate(x)
    last, last_is_final = ev, first is None
    e, g = ev.energy_hartree, ev.gradient_hartree_bohr.ravel()
    energies = [e]
    steps = None
    if settings.coordinates == "internal":
        internal = redundant_internals.build(numbers, x)
        if internal is not None:
            steps = _InternalSteps(internal, numbers, x, g, hessian)
            if not steps.complete:
                steps = None
    if steps is None:
        steps = _CartesianSteps(numbers, x, g, hessian)
    used = [steps.name]
    trust = settings.trust_radius_bohr
    force = _max_atom_force(g, x)
    converged = force < settings.max_force_hartree_bohr
    if progress:
        progress(0, e, force)
    while not converged and calls < settings.max_steps:
        proposal = steps.propose(trust)
        if proposal is None:  # the internal set no longer describes the geometry
            steps = _CartesianSteps(numbers, x, g)
            used.append(steps.name)
            proposal = steps.propose(trust)
        x_new, predicted, length = proposal
        ev = evaluate(x_new)
        e_new, g_new = ev.energy_hartree, ev.gradient_hartree_bohr.ravel()
        actual = e_new - e
        ratio = actual / predicted if abs(predicted) > 1e-14 else 1.0
        # Reject an uphill step: stay, with the updated Hessian and a smaller trust radius.
        accept = not (actual > 1e-6 and trust > settings.min_trust_radius_bohr)
        steps.update(x_new, g_new, accept)
        if ratio < 0.25:
            trust = max(0.25 * length, settings.min_trust_radius_bohr)
        elif ratio > 0.75 and length > 0.8 * trust:
            trust = min(2.0 * trust, settings.max_trust_radius_bohr)
        if not accept:
            last_is_final = False
            if progress:
                progress(calls, e, force)
            continue
        x, e, g = x_new, e_new, g_new
        last = ev
        last_is_final = True
        energies.append(e)
        force = _max_atom_force(g, x)
        converged = force < settings.max_force_hartree_bohr
        if progress:
            progress(calls, e, force)
    return OptimizationResult(
        positions_bohr=x, energy_hartree=e, max_force_hartree_bohr=force,
        converged=bool(converged), gradient_calls=calls, seconds=time.perf_counter() - t0,
        gradient_seconds=tg, energies_hartree=energies,
        final_evaluation=last if last_is_final else None, coordinates=", then ".join(used),
    )
