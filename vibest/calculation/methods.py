"""The levels of theory a user can choose (``--method``), in one table.

A *method* is one electronic-structure model (GFN2-xTB, or a density functional with a basis
set and a dispersion correction). A *level* says which method gives the geometry and the
Hessian (band positions) and, optionally, which other method gives the dipole derivatives
(band intensities): ``gfn2`` (the default: everything from GFN2-xTB), ``b3lyp`` (everything
from B3LYP-D3(BJ)/6-31G(d): geometry re-optimised from the GFN2-xTB minimum, analytic Hessian
and dipole derivatives), ``gfn2+b3lyp`` (GFN2-xTB geometry and modes, B3LYP dipole derivatives
at that geometry: the intensities of the density functional at a fraction of its cost).
"""

from __future__ import annotations

import copy
from dataclasses import asdict, dataclass

from ..errors import InputError

TIGHT_BINDING = "tight-binding"
DFT = "dft"


@dataclass(frozen=True)
class DFTSettings:
    """What defines a density-functional calculation (all of it changes the numbers).

    Attributes:
        functional: PySCF's name of the exchange-correlation functional (``"b3lyp"``).
        basis: basis set name as PySCF knows it (``"6-31g*"``).
        dispersion: PySCF's dispersion keyword (``"d3bj"``: Grimme's D3 with Becke-Johnson
            damping, through the pyscf-dispersion package), or None.
        grid_level: PySCF's integration grid level (0-9; 3 is PySCF's default).
        density_fitting: resolve the two-electron integrals with an auxiliary basis (everywhere:
            SCF, gradients, responses, Hessian).
        hessian_two_electron: how the analytic Hessian's assembly takes its second-derivative
            two-electron terms: ``"exact"`` or ``"density-fitted"`` (only those terms; the SCF,
            responses and dipole derivatives stay exact; vibest.calculation.hessian_assembly).
            It acts on full-level Hessians only, so it is in the store key only there and only
            when not exact (methods.without_unused_dft_settings): other records keep their keys.
        scf_tolerance_hartree: SCF energy convergence (Eh); gradients and responses need it tight.
        heavy_atom_rows: how the Hessian rows and dipole derivatives of atoms past neon are
            computed: ``"finite-difference"`` of analytic gradients and SCF dipoles, which include
            the grid's motion that PySCF's analytic Hessian leaves out (vibest.calculation.
            dft_engine). Part of the store key, so records from before (analytic rows, wrong by up
            to 200 cm^-1 for Cl and Br) are never reused.
        beyond_krypton_basis: basis set, and effective core potential of the same name, for the
            elements past krypton (iodine: 6-31G(d) has no functions for it, and def2-SVP's are
            made for a 28-electron core potential); ``"def2-svp"`` (Weigend & Ahlrichs 2005; core
            potentials of the Stuttgart-Cologne family, e.g. Peterson et al. 2003 for iodine;
            both from memory) or None to refuse such elements. In the store key only for
            molecules that have such an element (vibest.store), so no other record changes key.
    """

    functional: str = "b3lyp"
    basis: str = "6-31g*"
    dispersion: str | None = "d3bj"
    grid_level: int = 3
    density_fitting: bool = False
    hessian_two_electron: str = "exact"
    scf_tolerance_hartree: float = 1e-10
    heavy_atom_rows: str = "finite-difference"
    beyond_krypton_basis: str | None = "def2-svp"

    def to_dict(self) -> dict:
        return asdict(self)


#: Heaviest element computed all-electron (krypton); heavier ones need DFTSettings.beyond_krypton_basis.
MAX_ALL_ELECTRON_Z = 36


def elements_beyond_krypton(atomic_numbers) -> list[str]:
    """Symbols (sorted, once each) of the elements past krypton: those a density-functional
    method computes with an effective core potential."""
    from ase.data import chemical_symbols

    return sorted({chemical_symbols[int(z)] for z in atomic_numbers if int(z) > MAX_ALL_ELECTRON_Z})


def without_unused_dft_settings(options: dict, atomic_numbers) -> dict:
    """A copy of ``options`` (a CalculationOptions.to_dict()) without the density-functional
    settings that cannot change this molecule's numbers: the basis for elements past krypton
    when it has none; the Hessian's two-electron terms for the intensities engine (it computes
    no Hessian) and where they are exact (the way before the setting existed). So adding those
    settings changed no other record's store key, and cached records stay current."""
    options = copy.deepcopy(options)
    for engine in ("engine", "intensity_engine"):
        dft = (options.get(engine) or {}).get("dft") or {}
        if not elements_beyond_krypton(atomic_numbers):
            dft.pop("beyond_krypton_basis", None)
        if engine == "intensity_engine" or dft.get("hessian_two_electron") == "exact":
            dft.pop("hessian_two_electron", None)
    return options


@dataclass(frozen=True)
class Method:
    """One electronic-structure model.

    Attributes:
        key: what a user types (``--method``), e.g. ``"b3lyp"``.
        name: the name recorded with every result, e.g. ``"B3LYP-D3(BJ)/6-31G(d)"``.
        family: :data:`TIGHT_BINDING` or :data:`DFT`.
        description: one line for ``vibest methods``.
        dft: the density-functional settings (DFT family only).
    """

    key: str
    name: str
    family: str
    description: str
    dft: DFTSettings | None = None

    @property
    def is_dft(self) -> bool:
        return self.family == DFT


METHODS: dict[str, Method] = {m.key: m for m in (
    Method("gfn1", "GFN1-xTB", TIGHT_BINDING,
           "GFN1-xTB tight binding (tblite): seconds per molecule, its own fitted scale models, the default"),
    Method("gfn2", "GFN2-xTB", TIGHT_BINDING,
           "GFN2-xTB tight binding (tblite): seconds per molecule, its own fitted scale models"),
    Method("b3lyp", "B3LYP-D3(BJ)/6-31G(d)", DFT,
           "B3LYP with D3(BJ) dispersion, 6-31G(d) basis (def2-SVP with its core potential past krypton; "
           "PySCF): minutes per molecule, closed shell only",
           DFTSettings(functional="b3lyp", basis="6-31g*", dispersion="d3bj", grid_level=2,
                       hessian_two_electron="density-fitted")),
    # Two modern alternatives measured beside B3LYP (README "Levels of theory"). No scale models are
    # fitted for them (a fit needs their Hessians of the 82 reference molecules: hours on 2 cores;
    # side by side on 29 small training molecules, wB97X's per-coordinate model was only ~1.3 cm^-1
    # better than B3LYP's and r2SCAN's ~2.3 worse, README "A modern functional for positions?"),
    # so they serve as intensity methods (gfn1+wb97x) or, at the full level, with --scale-factor.
    # "wb97x-d3bj" is PySCF's keyword for the range-separated hybrid wB97X with D3(BJ) dispersion
    # (Najibi & Goerigk 2018 parameters, from memory), so no separate dispersion keyword.
    Method("wb97x", "wB97X-D3(BJ)/def2-SVP", DFT,
           "range-separated hybrid wB97X with D3(BJ) dispersion, def2-SVP basis (PySCF): as intensity method "
           "(gfn1+wb97x); no fitted scale models",
           DFTSettings(functional="wb97x-d3bj", basis="def2-svp", dispersion=None, grid_level=2)),
    # r2SCAN is a meta-GGA, more sensitive to the integration grid: PySCF's default level 3
    Method("r2scan", "r2SCAN-D3(BJ)/def2-SVP", DFT,
           "meta-GGA r2SCAN with D3(BJ) dispersion, def2-SVP basis (PySCF): as intensity method "
           "(gfn1+r2scan); no fitted scale models",
           DFTSettings(functional="r2scan", basis="def2-svp", dispersion="d3bj", grid_level=3)),
)}
#: The default level (decided 2026-12-04 on training figures, confirmed once on the blind set;
#: DEVELOPERS.md "Default-method decision"). Keep vibest.analysis.scaling.DEFAULT_METHOD_NAME equal
#: to its name (a test checks).
DEFAULT_METHOD = "gfn1"
# Grid of the shipped B3LYP: PySCF level 2. On 2-butanone against level 5 (same geometry): level 2
# within 1.8 cm^-1 above 400 cm^-1 and 7.6 cm^-1 in the torsions below, intensities within 2 %,
# its Hessian in half the time of level 3 (within 0.6 cm^-1); level 1 was 27 cm^-1 off above
# 400 cm^-1 (184 in a torsion) and intensities 43 %.


def method_named(text: str) -> Method:
    """The method a user typed (its key or its recorded name, any case)."""
    if not isinstance(text, str):
        raise InputError(f"a method is a name such as 'gfn2' or 'b3lyp', not {text!r}")
    wanted = text.strip().lower()
    for m in METHODS.values():
        if wanted in (m.key, m.name.lower()):
            return m
    raise InputError(f"unknown method {text!r}; choose one of {', '.join(METHODS)} "
                     "(or positions+intensities, e.g. gfn2+b3lyp)")


@dataclass(frozen=True)
class Level:
    """Which method gives positions (geometry, Hessian) and which gives intensities (dipole
    derivatives); ``intensities`` None means the same method."""

    positions: Method
    intensities: Method | None = None

    @property
    def key(self) -> str:
        return self.positions.key + (f"+{self.intensities.key}" if self.intensities else "")

    @property
    def name(self) -> str:
        if self.intensities is None:
            return self.positions.name
        return f"{self.positions.name} positions, {self.intensities.name} intensities"

    @property
    def uses_dft(self) -> bool:
        return self.positions.is_dft or bool(self.intensities and self.intensities.is_dft)


def parse_level(text: str) -> Level:
    """``"gfn2"``, ``"b3lyp"``, or ``"positions+intensities"`` such as ``"gfn2+b3lyp"``."""
    if not isinstance(text, str):
        raise InputError(f"a method is a name such as 'gfn2' or 'b3lyp', not {text!r}")
    parts = text.split("+")
    if len(parts) == 1:
        return Level(method_named(parts[0]))
    if len(parts) != 2 or not all(p.strip() for p in parts):
        raise InputError(f"cannot read method {text!r}: write one method (e.g. b3lyp) or positions+intensities "
                         "(e.g. gfn2+b3lyp)")
    positions, intensities = method_named(parts[0]), method_named(parts[1])
    if positions == intensities:
        return Level(positions)
    if not intensities.is_dft:
        raise InputError(f"{text!r}: intensities can come from a density-functional method only "
                         f"({', '.join(k for k, m in METHODS.items() if m.is_dft)})")
    if positions.is_dft:
        raise InputError(f"{text!r}: with density-functional positions the intensities come from the same method; "
                         f"use --method {positions.key}")
    return Level(positions, intensities)
