"""Shared fixtures: small molecules computed once per test session (the default level, GFN1-xTB, via tblite)."""

from __future__ import annotations

import functools
import os
import tempfile
from pathlib import Path

import pytest

# The tests never touch the user's result store: commands that use the default store get one in a
# temporary folder (subprocesses inherit it).
os.environ["VIBEST_STORE"] = str(Path(tempfile.mkdtemp(prefix="vibest-test-store-")) / "store.sqlite")

from vibest.pipeline import CalculationOptions, analyse, compute_record
from vibest.structure import build_molecule


@functools.lru_cache(maxsize=None)
def record_of(smiles: str):
    """Hessian record of a molecule with default settings, serial Hessian (cached)."""
    mol = build_molecule(smiles)
    record, converged, notes = compute_record(mol, CalculationOptions(workers=1))
    return record


@functools.lru_cache(maxsize=None)
def prediction_of(smiles: str):
    return analyse(record_of(smiles))


@pytest.fixture(scope="session")
def water():
    return prediction_of("O")


@pytest.fixture(scope="session")
def co2():
    return prediction_of("O=C=O")


def _from_jcamp_sdist(what: str, fetch_name: str):
    """A folder of the jcamp 1.3.2 sdist fetched by benchmarks/measured_set.py (SHA-256-checked at
    test time): a download that cannot happen skips; a file that does not verify fails."""
    import sys
    from pathlib import Path

    sys.path.insert(0, str(Path(__file__).resolve().parents[1] / "benchmarks"))
    import measured_set

    try:
        return getattr(measured_set, fetch_name)()
    except measured_set.IntegrityError as exc:
        pytest.fail(f"{what} do not verify: {exc}")
    except measured_set.FetchError as exc:
        pytest.skip(f"{what} not available: {exc}")


@pytest.fixture(scope="session")
def measured_folder():
    """Folder of the real measured spectra of benchmarks/data/measured_set.csv (jcamp 1.3.2 sdist)."""
    return _from_jcamp_sdist("measured spectra", "fetch")


@pytest.fixture(scope="session")
def condensed_folder():
    """Folder of the real liquid alcohol spectra of benchmarks/data/condensed_set.csv (jcamp 1.3.2 sdist)."""
    return _from_jcamp_sdist("condensed-phase spectra", "fetch_condensed")


@pytest.fixture(scope="session")
def mass_folder():
    """Folder of the real mass spectra of the jcamp 1.3.2 sdist (data/mass_spectra)."""
    return _from_jcamp_sdist("mass spectra", "fetch_mass_spectra")
