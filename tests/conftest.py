"""Shared fixtures: small molecules computed once per test session (GFN2-xTB via tblite)."""

from __future__ import annotations

import functools

import pytest

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
