"""vibest: estimate infrared spectra from molecular structure and compare them with measured ones.

Main entry points: :func:`vibest.predict` (SMILES -> :class:`vibest.pipeline.Prediction`) and
:func:`vibest.analyse` (stored Hessian record -> prediction, no new gradients).
The names are loaded on first use, so that light submodules (e.g. the Hessian worker processes)
do not import RDKit, ASE or matplotlib.
"""

from __future__ import annotations

__version__ = "0.1.0"

from .errors import CalculationError, InputError, VibestError  # noqa: E402

#: public name -> submodule that defines it. No submodule shares a public name (``vibest.predict``
#: is the function; the pipeline lives in ``vibest.pipeline``), so importing a submodule never
#: replaces a public name of the package (tests/test_api.py calls each one twice).
_LAZY = {"predict": "pipeline", "analyse": "pipeline", "compute_record": "pipeline", "Prediction": "pipeline",
         "CalculationOptions": "pipeline", "SpectrumOptions": "pipeline",
         "CAUTION": "pipeline", "isotopologue": "pipeline", "prediction_thermochemistry": "pipeline",
         "HessianRecord": "calculation.record", "calculation_options": "calculation.driver",
         "check_structure": "verdict", "make_decoys": "decoys", "assess": "confidence",
         "compare": "comparison", "ComparisonOptions": "comparison", "rank_candidates": "ranking", "Candidate": "ranking",
         "load_spectrum": "measured", "difference_spectrum": "difference", "fit_components": "components",
         "Component": "components", "conversion_series": "series", "load_series": "series",
         "predict_many": "batch", "RecordStore": "store"}

__all__ = [*_LAZY, "InputError", "CalculationError", "VibestError", "__version__"]


def __getattr__(name: str):
    if name in _LAZY:
        import importlib

        module = importlib.import_module(f".{_LAZY[name]}", __name__)
        return getattr(module, name)
    raise AttributeError(f"module 'vibest' has no attribute {name!r}")
