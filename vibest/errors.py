"""Exceptions that carry a message meant for the user (shown as one line, no traceback)."""

from __future__ import annotations


class VibestError(Exception):
    """Base class of every error vibest raises on purpose."""


class InputError(VibestError):
    """The user's input (SMILES, option, file) cannot be used; the message says why."""


class CalculationError(VibestError):
    """The electronic-structure calculation failed (e.g. SCF did not converge)."""
