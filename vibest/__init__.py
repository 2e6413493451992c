"""vibest: estimate infrared spectra from molecular structure and compare them with measured ones.

Main entry points: :func:`vibest.predict` (SMILES -> :class:`vibest.predict.Prediction`) and
:func:`vibest.analyse` (stored Hessian record -> prediction, no new gradients).
"""

__version__ = "0.1.0"

from .errors import CalculationError, InputError, VibestError  # noqa: E402
from .predict import CAUTION, Prediction, analyse, compute_record, predict  # noqa: E402

__all__ = ["predict", "analyse", "compute_record", "Prediction", "CAUTION", "InputError",
           "CalculationError", "VibestError", "__version__"]
