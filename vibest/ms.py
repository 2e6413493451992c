"""A mass spectrum beside the IR: candidates checked against the molecular ion and isotope pattern.

IR tells functional groups, a mass spectrum tells mass and elements. For each candidate vibest
computes its formula (RDKit, hydrogens included), nominal and monoisotopic mass and its isotope
pattern at nominal resolution (isotope masses and abundances from RDKit's periodic table, the
IUPAC isotopic compositions), and looks at the measured spectrum there:

* **molecular ion**: M+. is taken at the candidate's nominal mass M (the most abundant isotope of
  each element), or M+1 for chemical ionisation ([M+H]+); seen when it holds at least
  :data:`SEEN_PERCENT` % of the base peak. Under electron ionisation many molecules show a weak
  or no molecular ion (alcohols, branched alkanes): then nothing is concluded from it;
* **heavier ions**: a peak of at least :data:`HEAVIER_PERCENT` % of the base peak above the
  candidate's whole isotope cluster contradicts it under EI (no fragment outweighs the molecule);
* **isotope cluster**: when M+. is seen, the measured M+2/M, M+4/M and M+6/M against the computed
  ones (chlorine, bromine, sulfur show there): a difference of more than :data:`RATIO_TOLERANCE`
  (absolute, plus a quarter of the computed value) contradicts the candidate. The chlorine and
  bromine count that best explains the measured cluster is reported. A candidate without Cl or
  Br whose M sits at the heavy end of a measured Cl/Br cluster (peaks at M-2, M-4 ... whose
  ratios all fit a computed Cl/Br pattern) is contradicted too;
* the **nitrogen rule** (an odd nominal mass means an odd number of nitrogen atoms) is stated for
  the M taken (:func:`nitrogen_rule`).

``--formula`` or ``--mass`` stand in for a spectrum when only those are known.
"""

from __future__ import annotations

import re
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np

from .errors import InputError

SEEN_PERCENT = 1.0
HEAVIER_PERCENT = 3.0
RATIO_TOLERANCE = 0.08
#: Smallest isotope-pattern share kept (relative to the most abundant peak).
PATTERN_CUTOFF = 1e-6
MAX_MS_BYTES = 20_000_000
CONSISTENT, CONTRADICTED, UNDECIDED = "consistent", "contradicted", "undecided"


@dataclass(frozen=True)
class MassSpectrum:
    """A mass spectrum at nominal (integer) m/z: ascending unique m/z and intensities relative to
    the base peak (100). ``chemical_ionisation`` when the file says CI."""

    mz: np.ndarray
    intensity: np.ndarray
    source: str = ""
    title: str = ""
    chemical_ionisation: bool = False
    notes: tuple[str, ...] = ()

    def at(self, mz: int) -> float:
        """Relative intensity (% of base) at nominal m/z (0 where there is no peak)."""
        k = np.searchsorted(self.mz, mz)
        return float(self.intensity[k]) if k < len(self.mz) and self.mz[k] == mz else 0.0


def _nominal(mz: np.ndarray, y: np.ndarray, source: str, notes: list[str]) -> tuple[np.ndarray, np.ndarray]:
    """Peaks at nominal m/z (largest intensity per unit; a profile is reduced to its maxima)."""
    order = np.argsort(mz, kind="stable")
    if np.any(np.diff(mz) < 0):
        notes.append("m/z values were not in ascending order: sorted")
    mz, y = mz[order], y[order]
    if len(mz) > 2 and np.median(np.diff(mz)) < 0.5:
        from scipy.signal import find_peaks

        idx, _ = find_peaks(np.concatenate([[0.0], y, [0.0]]))
        mz, y = mz[idx - 1], y[idx - 1]
        notes.append("continuous (profile) data: reduced to the maxima of its peaks")
    unit = np.rint(mz).astype(int)
    out: dict[int, float] = {}
    for m, v in zip(unit, y):
        out[m] = max(out.get(m, 0.0), float(v))
    keys = np.array(sorted(out), dtype=int)
    vals = np.array([out[k] for k in keys])
    if not len(keys) or vals.max() <= 0:
        raise InputError(f"{source}: no peaks with positive intensity")
    return keys, 100.0 * vals / vals.max()


def _from_values(mz, y, source: str, title: str = "", ci: bool = False, notes=()) -> MassSpectrum:
    mz, y = np.asarray(mz, float), np.asarray(y, float)
    if not len(mz):
        raise InputError(f"{source}: no peaks")
    if not (np.all(np.isfinite(mz)) and np.all(np.isfinite(y))):
        raise InputError(f"{source}: m/z or intensity values that are not numbers")
    if np.any(y < 0):
        raise InputError(f"{source}: negative intensities (at m/z {mz[np.argmax(y < 0)]:g}): not a mass spectrum")
    if np.any(mz <= 0) or mz.max() > 100_000:
        raise InputError(f"{source}: m/z values must lie between 0 and 100000")
    notes = list(notes)
    keys, vals = _nominal(mz, y, source, notes)
    return MassSpectrum(keys, vals, source, title, ci, tuple(notes))


def load_mass_spectrum(path: str | Path, block: int | None = None) -> MassSpectrum:
    """A mass spectrum from JCAMP-DX (``##DATA TYPE=MASS SPECTRUM``, peak table or continuous
    data; in a file of several blocks the first mass spectrum, or block ``block``) or from a CSV
    of m/z and intensity (a header line is optional)."""
    from .files import read_limited

    p = Path(path)
    data = read_limited(p, MAX_MS_BYTES, "mass spectrum file")
    if data.lstrip(b"\xef\xbb\xbf \t\r\n").startswith(b"##"):
        return _from_jcamp(p, data, block)
    return _from_csv(p, data)


def _from_jcamp(p: Path, data: bytes, block: int | None) -> MassSpectrum:
    from .measured.jcamp import parse_jcamp

    blocks = parse_jcamp(data.decode("latin-1"), str(p))
    kinds = [b.labels.get("DATATYPE", "").strip().upper() for b in blocks]
    mass = [k for k, kind in enumerate(kinds) if "MASS" in kind]
    if block is not None:
        if not 1 <= block <= len(blocks):
            raise InputError(f"{p}: block {block} does not exist (the file holds {len(blocks)})")
        k = block - 1
        if k not in mass:
            raise InputError(f"{p}: block {block} is {kinds[k] or 'of no stated type'}, not a mass spectrum")
    elif not mass:
        raise InputError(f"{p}: the file is {kinds[0] or 'of no stated type'}, not a mass spectrum "
                         "(##DATA TYPE=MASS SPECTRUM)")
    else:
        k = mass[0]
    b = blocks[k]
    notes = [f"block {k + 1} of {len(blocks)}: {b.title() or 'untitled'}"] if len(blocks) > 1 else []
    mode = " ".join(v for name, v in b.labels.items() if "IONIZATION" in name or "IONISATION" in name).upper()
    ci = bool(re.search(r"\bCI\b|CHEMICAL", mode)) or bool(re.search(r"\bCI\b", b.title().upper()))
    return _from_values(b.x, b.y, str(p), b.title(), ci, notes)


def _from_csv(p: Path, data: bytes) -> MassSpectrum:
    try:
        text = data.decode("utf-8-sig")
    except UnicodeDecodeError:
        raise InputError(f"{p}: not a text file of m/z and intensity") from None
    mz, y = [], []
    for k, line in enumerate(text.splitlines(), start=1):
        cells = [c.strip() for c in re.split(r"[,;\t]", line) if c.strip()]
        if not cells or cells[0].startswith("#"):
            continue
        try:
            mz.append(float(cells[0]))
            y.append(float(cells[1]))
        except (ValueError, IndexError):
            if mz:
                raise InputError(f"{p}: line {k} is not 'm/z, intensity'") from None
            if re.search(r"wavenum|cm-1|cm\^-1|1/cm|absorb|transm|\bnm\b|wavelength", ",".join(cells).lower()):
                raise InputError(f"{p}: its header ({','.join(cells)[:60]}) names an optical spectrum, not m/z and "
                                 "intensity") from None
            continue  # a header line
    return _from_values(mz, y, str(p))


# -- formulas and isotope patterns --------------------------------------------------------------

def formula_counts(smiles: str) -> dict[str, int]:
    """Element counts of a SMILES, hydrogens included (InputError if RDKit cannot read it)."""
    from rdkit import Chem

    from .structure import parse_smiles

    mol = Chem.AddHs(parse_smiles(smiles)[0])
    out: dict[str, int] = {}
    for atom in mol.GetAtoms():
        out[atom.GetSymbol()] = out.get(atom.GetSymbol(), 0) + 1
    return out


def parse_formula(text: str) -> dict[str, int]:
    """'C2Cl4', 'C2 H6 O' or 'C 3 H 8 O 1' -> element counts (InputError for anything else)."""
    from rdkit import Chem

    compact = re.sub(r"\s+", "", text)
    if not compact or not re.fullmatch(r"([A-Z][a-z]?\d*)+", compact):
        raise InputError(f"formula {text!r}: write it as element symbols with counts, e.g. C2H6O")
    table = Chem.GetPeriodicTable()
    out: dict[str, int] = {}
    for sym, n in re.findall(r"([A-Z][a-z]?)(\d*)", compact):
        try:
            table.GetAtomicNumber(sym)
        except RuntimeError:
            raise InputError(f"formula {text!r}: {sym} is not an element") from None
        out[sym] = out.get(sym, 0) + (int(n) if n else 1)
    if any(v == 0 for v in out.values()):
        raise InputError(f"formula {text!r}: a count of 0")
    return out


def hill(counts: dict[str, int]) -> str:
    """Hill notation: C, then H, then the others alphabetically (all alphabetical without C)."""
    keys = sorted(counts)
    if "C" in counts:
        keys = ["C"] + (["H"] if "H" in counts else []) + [k for k in keys if k not in ("C", "H")]
    return "".join(f"{k}{counts[k] if counts[k] > 1 else ''}" for k in keys)


def _isotopes(symbol: str) -> list[tuple[int, float, float]]:
    """(mass number, abundance fraction, mass u) of the stable isotopes of an element (RDKit)."""
    from rdkit import Chem

    table = Chem.GetPeriodicTable()
    z = table.GetAtomicNumber(symbol)
    common = table.GetMostCommonIsotope(z)
    out = [(a, table.GetAbundanceForIsotope(z, a) / 100.0, table.GetMassForIsotope(z, a))
           for a in range(max(1, common - 8), common + 9) if table.GetAbundanceForIsotope(z, a) > 0]
    if not out:  # no natural isotopes listed (radioactive elements): the most common isotope alone
        out = [(common, 1.0, table.GetMassForIsotope(z, common))]
    return out


@dataclass(frozen=True)
class IsotopePattern:
    """Nominal mass M (most abundant isotope of each element), monoisotopic mass (u), and the
    pattern as {offset from M: intensity relative to M = 1}."""

    formula: str
    nominal_mass: int
    monoisotopic_mass_u: float
    relative: dict[int, float] = field(default_factory=dict)

    def ratio(self, offset: int) -> float:
        return self.relative.get(offset, 0.0)

    def span(self, share: float = 0.005) -> int:
        """Largest offset whose intensity is at least ``share`` of the pattern's largest peak."""
        top = max(self.relative.values())
        return max(k for k, v in self.relative.items() if v >= share * top)


def isotope_pattern(counts: dict[str, int]) -> IsotopePattern:
    """The isotope pattern at nominal resolution of a formula (element -> count)."""
    dist = {0: 1.0}
    nominal, mono = 0, 0.0
    for symbol, n in counts.items():
        iso = _isotopes(symbol)
        a0, _, m0 = max(iso, key=lambda t: t[1])
        nominal += n * a0
        mono += n * m0
        single = {a - a0: f for a, f, _ in iso}
        for _ in range(n):
            new: dict[int, float] = {}
            for k, p in dist.items():
                for d, f in single.items():
                    new[k + d] = new.get(k + d, 0.0) + p * f
            top = max(new.values())
            dist = {k: v for k, v in new.items() if v >= PATTERN_CUTOFF * top}
    base = dist[0]
    return IsotopePattern(hill(counts), nominal, mono, {k: v / base for k, v in sorted(dist.items())})


def implied_halogens(ms: MassSpectrum, m: int, max_cl: int = 8, max_br: int = 4) -> tuple[int, int]:
    """(Cl, Br) counts whose isotope cluster best explains the measured M+2/M, M+4/M, M+6/M at ``m``."""
    seen = ms.at(m)
    measured = np.array([ms.at(m + d) / seen for d in (2, 4, 6)]) if seen > 0 else np.zeros(3)
    best, err = (0, 0), np.inf
    for cl in range(max_cl + 1):
        for br in range(max_br + 1):
            if cl + br == 0:
                computed = np.zeros(3)
            else:
                p = isotope_pattern({k: v for k, v in (("Cl", cl), ("Br", br)) if v})
                computed = np.array([p.ratio(d) for d in (2, 4, 6)])
            e = float(np.sum((measured - computed) ** 2))
            if e < err - 1e-12:
                best, err = (cl, br), e
    return best


@dataclass(frozen=True)
class MsCheck:
    """One candidate against the mass spectrum (or the given formula or mass).

    Attributes:
        status: "consistent", "contradicted" or "undecided".
        reason: in words, e.g. "M+. 164 seen (77 % of base); M+2/M 1.29 (computed 1.28): 4 Cl".
        ratios: measured and computed M+1/M, M+2/M, M+4/M, M+6/M (when M+. is seen).
    """

    name: str
    smiles: str
    formula: str
    nominal_mass: int
    monoisotopic_mass_u: float
    status: str
    reason: str
    ratios: dict[str, tuple[float, float]] = field(default_factory=dict)

    def to_dict(self) -> dict:
        return {"name": self.name, "smiles": self.smiles, "formula": self.formula, "nominal_mass": self.nominal_mass,
                "monoisotopic_mass_u": self.monoisotopic_mass_u, "status": self.status, "reason": self.reason,
                "ratios": {k: {"measured": m, "computed": c} for k, (m, c) in self.ratios.items()}}


def _cluster_start(ms: MassSpectrum, m: int) -> int:
    """Lowest m/z of the run of significant peaks m, m-2, m-4, ... (at most 8 steps)."""
    start = m
    while m - start < 16 and ms.at(start - 2) >= SEEN_PERCENT:
        start -= 2
    return start


def _halogen_cluster_below(ms: MassSpectrum, m: int) -> tuple[int, int, int] | None:
    """(start, Cl, Br) when the peaks from a lower m/z up to ``m`` are a chlorine/bromine isotope
    cluster (every ratio to its first peak within the tolerance of the computed one), else None."""
    start = _cluster_start(ms, m)
    if start == m:
        return None
    cl, br = implied_halogens(ms, start)
    if (cl, br) == (0, 0):
        return None
    p = isotope_pattern({k: v for k, v in (("Cl", cl), ("Br", br)) if v})
    first = ms.at(start)
    for d in range(2, m - start + 1, 2):
        meas, comp = ms.at(start + d) / first, p.ratio(d)
        if abs(meas - comp) > RATIO_TOLERANCE + 0.25 * comp:
            return None
    return start, cl, br


def _halogen_words(cl: int, br: int) -> str:
    parts = [f"{n} {s}" for n, s in ((cl, "Cl"), (br, "Br")) if n]
    return " and ".join(parts) if parts else "no Cl or Br"


def _against_spectrum(ms: MassSpectrum, p: IsotopePattern, counts: dict[str, int]) -> tuple[str, str, dict]:
    m = p.nominal_mass + (1 if ms.chemical_ionisation else 0)
    ion = "[M+H]+" if ms.chemical_ionisation else "M+."
    top = m + p.span()
    heavier = [(int(x), float(v)) for x, v in zip(ms.mz, ms.intensity) if x > top and v >= HEAVIER_PERCENT]
    if heavier and not ms.chemical_ionisation:
        x, v = max(heavier)
        return CONTRADICTED, (f"peaks up to m/z {x} ({v:.0f} % of base) lie above the candidate's {ion} cluster "
                              f"(m/z {m}-{top}): the sample is heavier"), {}
    seen = ms.at(m)
    below = _halogen_cluster_below(ms, m) if seen >= SEEN_PERCENT and not (counts.get("Cl") or counts.get("Br")) \
        else None
    if below is not None:
        start, cl, br = below
        return CONTRADICTED, (f"m/z {m} is the heavy end of an isotope cluster from m/z {start} ({ms.at(start):.0f} % "
                              f"of base) that implies {_halogen_words(cl, br)}; the candidate has none"), {}
    if seen < SEEN_PERCENT:
        heaviest = max((int(x) for x, v in zip(ms.mz, ms.intensity) if v >= SEEN_PERCENT), default=None)
        where = (f"the spectrum's peaks end at m/z {int(ms.mz[-1])}" if ms.mz[-1] < m else
                 f"the heaviest ion of at least {SEEN_PERCENT:g} % is m/z {heaviest}")
        return UNDECIDED, (f"{ion} {m} not seen ({seen:.1f} % of base; {where}): a lighter molecule, or a molecular "
                           "ion too weak to see (common under electron ionisation for alcohols, branched alkanes)"), {}
    ratios = {f"M+{d}/M": (ms.at(m + d) / seen, p.ratio(d)) for d in (1, 2, 4, 6)}
    bad = [k for k, (meas, comp) in ratios.items() if k != "M+1/M" and abs(meas - comp) > RATIO_TOLERANCE + 0.25 * comp]
    cl, br = implied_halogens(ms, m)
    has = (counts.get("Cl", 0), counts.get("Br", 0))
    cluster = ", ".join(f"{k} {meas:.2f} (computed {comp:.2f})" for k, (meas, comp) in ratios.items()
                        if k == "M+1/M" or meas > 0.02 or comp > 0.02)
    said = f"{ion} {m} seen ({seen:.0f} % of base); {cluster}"
    if bad:
        return CONTRADICTED, (f"{said}: the cluster implies {_halogen_words(cl, br)}; the candidate has "
                              f"{_halogen_words(*has)}"), ratios
    halogens = f": {_halogen_words(cl, br)}" if (cl, br) != (0, 0) or any(has) else ""
    return CONSISTENT, f"{said}{halogens}; nitrogen rule for M = {p.nominal_mass}: {nitrogen_rule(p.nominal_mass)}", \
        ratios


def check_candidate(smiles: str, name: str = "", *, ms: MassSpectrum | None = None, formula: str | None = None,
                    mass: int | None = None) -> MsCheck:
    """``smiles`` against a mass spectrum, a formula or a nominal mass (at least one of them)."""
    if ms is None and formula is None and mass is None:
        raise InputError("give a mass spectrum, a formula or a mass to check against")
    counts = formula_counts(smiles)
    p = isotope_pattern(counts)
    base = (name or smiles, smiles, p.formula, p.nominal_mass, p.monoisotopic_mass_u)
    if formula is not None:
        given = hill(parse_formula(formula))
        if given != p.formula:
            return MsCheck(*base, CONTRADICTED, f"formula {p.formula}, not the given {given}")
    if mass is not None and int(mass) != p.nominal_mass:
        return MsCheck(*base, CONTRADICTED, f"nominal mass {p.nominal_mass}, not the given {int(mass)}")
    if ms is None:
        return MsCheck(*base, CONSISTENT, "formula matches" if formula else "nominal mass matches")
    status, reason, ratios = _against_spectrum(ms, p, counts)
    return MsCheck(*base, status, reason, ratios)


def check_candidates(candidates, *, ms: MassSpectrum | None = None, formula: str | None = None,
                     mass: int | None = None) -> list[MsCheck]:
    """:func:`check_candidate` for each (name, smiles) pair or :class:`vibest.ranking.Candidate`;
    a candidate RDKit cannot read is left out (the ranking reports it)."""
    out = []
    for c in candidates:
        name, smiles = (c.name, c.smiles) if hasattr(c, "smiles") else c
        try:
            out.append(check_candidate(smiles, name, ms=ms, formula=formula, mass=mass))
        except InputError:
            continue
    return out


def nitrogen_rule(nominal_mass: int) -> str:
    """The nitrogen rule for a molecular ion of this nominal mass (closed-shell organic molecules)."""
    return ("odd: an odd number of nitrogen atoms" if nominal_mass % 2 else
            "even: no nitrogen or an even number of nitrogen atoms")


def table(checks: list[MsCheck]) -> str:
    """A plain-text table of the checks."""
    lines = [f"{'candidate':<24} {'formula':<10} {'M':>5} {'status':<13} why"]
    for c in checks:
        lines.append(f"{c.name[:24]:<24} {c.formula:<10} {c.nominal_mass:>5} {c.status:<13} {c.reason}")
    return "\n".join(lines)


@dataclass(frozen=True)
class MassEvidence:
    """What is known of the sample's mass: a spectrum, a formula and/or a nominal mass, and
    whether candidates they contradict are dropped from a ranking (``drop``)."""

    spectrum: MassSpectrum | None = None
    formula: str | None = None
    mass: int | None = None
    drop: bool = False

    def __post_init__(self):
        if self.spectrum is None and self.formula is None and self.mass is None:
            raise InputError("mass evidence needs a mass spectrum, a formula or a mass")
        if self.formula is not None:
            parse_formula(self.formula)
        if self.mass is not None and not (1 <= int(self.mass) <= 100_000):
            raise InputError(f"mass {self.mass}: give the nominal mass of the molecule (1-100000)")

    def checks(self, candidates) -> list[MsCheck]:
        return check_candidates(candidates, ms=self.spectrum, formula=self.formula, mass=self.mass)

    def screen(self, candidates, keep: str | None = None) -> tuple[list[MsCheck], list[MsCheck]]:
        """(the check of every candidate, the contradicted ones to leave out when ``drop`` is set;
        never the candidate with SMILES ``keep``)."""
        checks = self.checks(candidates)
        dropped = [c for c in checks if self.drop and c.status == CONTRADICTED and c.smiles != keep]
        return checks, dropped

    def describe(self) -> str:
        parts = [f"mass spectrum {self.spectrum.source}" + (" (chemical ionisation)" if self.spectrum.chemical_ionisation
                                                            else "")] if self.spectrum else []
        parts += [f"formula {hill(parse_formula(self.formula))}"] if self.formula else []
        parts += [f"nominal mass {int(self.mass)}"] if self.mass is not None else []
        return ", ".join(parts)
