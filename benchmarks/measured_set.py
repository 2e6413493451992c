"""The measured gas-phase IR spectra of benchmarks/data/measured_set.csv, fetched at run time.

The spectra ship inside the source distribution of the PyPI package ``jcamp`` 1.3.2. Their
headers declare copyright, so they are never copied into this repository: :func:`fetch` downloads
the sdist with pip into a cache folder, checks its SHA-256 and unpacks only the files listed.
"""

from __future__ import annotations

import csv
import hashlib
import os
import subprocess
import sys
import tarfile
from dataclasses import dataclass
from pathlib import Path

SDIST = "jcamp-1.3.2.tar.gz"
SHA256 = "27ce753f5bb2601d3138fc2a4787c0049deb0ab51ce052cb62806bcbd12eddb9"
MEMBER_DIR = "jcamp-1.3.2/data/infrared_spectra/"
TABLE = Path(__file__).parent / "data" / "measured_set.csv"
#: The reserved blind set (NIST ADC files of the same sdist): looked at once, see DEVELOPERS.md.
BLIND_TABLE = Path(__file__).parent / "data" / "blind_set.csv"
#: Two real condensed-phase (liquid) alcohol spectra of the same sdist folder.
CONDENSED_TABLE = Path(__file__).parent / "data" / "condensed_set.csv"


@dataclass(frozen=True)
class MeasuredEntry:
    file: str
    name: str
    cas: str
    smiles: str
    origin: str


def entries(table: Path = TABLE) -> list[MeasuredEntry]:
    lines = [l for l in table.read_text().splitlines() if l and not l.startswith("#")]
    return [MeasuredEntry(**row) for row in csv.DictReader(lines)]


def cache_dir() -> Path:
    base = os.environ.get("VIBEST_DATA_CACHE") or os.path.join(os.path.expanduser("~"), ".cache", "vibest", "external")
    return Path(base)


class FetchError(RuntimeError):
    """The sdist could not be fetched (no network, no pip): callers may skip with this reason."""


class IntegrityError(FetchError):
    """The sdist was fetched but is not the expected file (SHA-256 mismatch): never a skip."""


def _sha256(path: Path) -> str:
    h = hashlib.sha256()
    with open(path, "rb") as fh:
        for chunk in iter(lambda: fh.read(1 << 20), b""):
            h.update(chunk)
    return h.hexdigest()


def _verified_sdist(root: Path, timeout_s: float) -> Path:
    """The jcamp 1.3.2 sdist in ``root``, downloaded if missing, SHA-256 checked."""
    root.mkdir(parents=True, exist_ok=True)
    sdist = root / SDIST
    if not sdist.exists() or _sha256(sdist) != SHA256:
        cmd = [sys.executable, "-m", "pip", "download", "--no-deps", "--no-binary", ":all:", "--quiet",
               "jcamp==1.3.2", "-d", str(root)]
        try:
            subprocess.run(cmd, check=True, capture_output=True, timeout=timeout_s)
        except (subprocess.SubprocessError, OSError) as exc:
            raise FetchError(f"could not download jcamp==1.3.2 sdist: {exc}") from None
    if not sdist.exists():
        raise FetchError("pip did not produce jcamp-1.3.2.tar.gz")
    digest = _sha256(sdist)
    if digest != SHA256:
        raise IntegrityError(f"jcamp-1.3.2.tar.gz has SHA-256 {digest}, expected {SHA256}")
    return sdist


def _extract(sdist: Path, member_dir: str, files: list[str], out: Path) -> Path:
    out.mkdir(parents=True, exist_ok=True)
    with tarfile.open(sdist) as tar:
        for f in files:
            (out / f).write_bytes(tar.extractfile(tar.getmember(member_dir + f)).read())
    return out


def fetch(directory: Path | None = None, timeout_s: float = 180.0, table: Path = TABLE) -> Path:
    """Folder holding the .jdx files listed in ``table`` (downloading and verifying the sdist once)."""
    root = directory or cache_dir()
    out = root / ("jcamp-1.3.2-infrared" if table == TABLE else f"jcamp-1.3.2-{table.stem}")
    wanted = [e.file for e in entries(table)]
    if all((out / f).exists() for f in wanted):
        return out
    return _extract(_verified_sdist(root, timeout_s), MEMBER_DIR, wanted, out)


def fetch_condensed(directory: Path | None = None, timeout_s: float = 180.0) -> Path:
    """Folder holding the condensed-phase files of :data:`CONDENSED_TABLE`."""
    return fetch(directory, timeout_s, CONDENSED_TABLE)


#: Mass spectra of the same sdist (data/mass_spectra/), for the mass-spectrum cross-check; like
#: the infrared files they are read at run time, never stored in this repository.
MASS_SPECTRA_DIR = "jcamp-1.3.2/data/mass_spectra/"
MASS_SPECTRA = ("1-propanol_ms.jdx", "ethanol_ms.jdx", "Tetrachloroethylene_ms.jdx", "118-96-7-Mass.jdx",
                "CH4_CI.jdx")


def fetch_mass_spectra(directory: Path | None = None, timeout_s: float = 180.0) -> Path:
    """Folder holding the sdist's mass spectra (:data:`MASS_SPECTRA`)."""
    root = directory or cache_dir()
    out = root / "jcamp-1.3.2-mass"
    if all((out / f).exists() for f in MASS_SPECTRA):
        return out
    return _extract(_verified_sdist(root, timeout_s), MASS_SPECTRA_DIR, list(MASS_SPECTRA), out)
