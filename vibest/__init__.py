"""vibest: estimate infrared spectra from molecular structure and compare them with measured ones.

Main entry points: :func:`vibest.predict` (SMILES -> :class:`vibest.predict.Prediction`) and
:func:`vibest.analyse` (stored Hessian record -> prediction, no new gradients).
The names are loaded on first use, so that light submodules (e.g. the Hessian worker processes)
do not import RDKit, ASE or matplotlib.
"""

from __future__ import annotations

__version__ = "0.1.0"

from .errors import CalculationError, InputError, VibestError  # noqa: E402

_LAZY = {"predict": "predict", "analyse": "predict", "compute_record": "predict", "Prediction": "predict",
         "CAUTION": "predict", "isotopologue": "predict", "prediction_thermochemistry": "predict",
         "compare": "compare", "rank_candidates": "ranking", "load_spectrum": "measured",
         "predict_many": "batch", "RecordStore": "store"}

__all__ = ["predict", "analyse", "compute_record", "Prediction", "CAUTION", "isotopologue",
           "prediction_thermochemistry", "compare", "rank_candidates", "load_spectrum", "predict_many", "RecordStore",
           "InputError",
           "CalculationError", "VibestError", "__version__"]


def __getattr__(name: str):
    if name in _LAZY:
        import importlib

        module = importlib.import_module(f".{_LAZY[name]}", __name__)
        return getattr(module, name)
    raise AttributeError(f"module 'vibest' has no attribute {name!r}")
