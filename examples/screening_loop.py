"""A screening script of the kind the Python API is for (invented scenario).

The Tarnwick Process Lab watches the vent stream of reactor R-3 for small solvents and
by-products. Before each campaign they predict the strongest IR bands of everything that could
appear, to choose the windows their gas cell should watch. Run:

    python examples/screening_loop.py [SMILES ...]

Predictions are estimates: confirm any identification with reference standards.
"""

from __future__ import annotations

import sys

import vibest

WATCH_LIST = {"water": "O", "methanol": "CO", "formaldehyde": "C=O"}


def main(argv: list[str]) -> int:
    molecules = {s: s for s in argv} if argv else WATCH_LIST
    for name, smiles in molecules.items():
        try:
            pred = vibest.predict(smiles, workers=1)
        except vibest.InputError as exc:
            print(f"{name}: skipped ({exc})")
            continue
        bands = ", ".join(f"{b.wavenumber_cm1:.0f} cm^-1 ({b.intensity_km_mol:.0f} km/mol, {b.label})"
                          for b in pred.strongest(2))
        print(f"{name} [{pred.smiles}]: {bands}")
    print(f"caution: {vibest.CAUTION}")
    return 0


if __name__ == "__main__":
    sys.exit(main(sys.argv[1:]))
