"""Build the invented demo spectrum examples/hx07-recovered-solvent.csv (run once; the CSV is committed).

The Halvorsen Lab scenario is invented, and so is this "measurement". It is built from published
band positions of the compound it stands for, 2-butanone: the fundamentals of Shimanouchi's
*Tables of Molecular Vibrational Frequencies Consolidated Vol. I* (NSRDS-NBS 39, 1972; the rows of
vibest/data/fundamentals.csv; largely liquid-phase values, e.g. C=O at 1716 cm^-1), with relative
intensities by the classes of common practice for aliphatic methyl ketones (no source: C=O
stretch very strong, C-C(=O)-C stretch near 1170 strong, CH3 umbrella near 1360 medium-strong,
C-H stretches and other CH3/CH2 deformations medium, skeletal and rocking modes weak). Bands are
Lorentzians of 14 cm^-1 FWHM (a neat liquid), a gentle sloping baseline and deterministic noise
are added, and the result is written as percent transmittance with a header that says it is
invented. Nothing here was shaped to make a scorer prefer one candidate.

    python examples/make_hx07_spectrum.py
"""

from __future__ import annotations

from pathlib import Path

import numpy as np

#: (wavenumber cm^-1 from Shimanouchi's 2-butanone table, relative intensity class)
BANDS = [(2983, 0.10), (2983, 0.10), (2983, 0.08), (2983, 0.08), (2941, 0.10), (2910, 0.06), (2884, 0.05),
         (1716, 1.00), (1460, 0.25), (1460, 0.20), (1422, 0.20), (1413, 0.20), (1413, 0.15), (1373, 0.40),
         (1346, 0.10), (1263, 0.10), (1263, 0.05), (1182, 0.60), (1108, 0.10), (1089, 0.10), (997, 0.08),
         (952, 0.20), (939, 0.20), (768, 0.10), (760, 0.10), (590, 0.15), (460, 0.05), (413, 0.05)]
FWHM_CM1 = 14.0
PEAK_ABSORBANCE = 1.2


def spectrum() -> tuple[np.ndarray, np.ndarray]:
    x = np.arange(4000.0, 449.0, -2.0)
    half = FWHM_CM1 / 2
    a = sum(h * half ** 2 / ((x - c) ** 2 + half ** 2) for c, h in BANDS)
    a = PEAK_ABSORBANCE * a / a.max() + 0.02 + 0.01 * (4000 - x) / 3550  # sloping baseline
    rng = np.random.default_rng(707)  # HX-07
    a = a + rng.normal(0.0, 0.003, size=a.shape)
    return x, 100.0 * 10 ** (-a)


def main() -> None:
    x, t = spectrum()
    out = Path(__file__).with_name("hx07-recovered-solvent.csv")
    lines = ["# INVENTED demo data (not a real measurement): Halvorsen Lab, batch HX-07 recovered solvent, %T",
             "# built by examples/make_hx07_spectrum.py from Shimanouchi's 2-butanone band positions (NSRDS-NBS 39)",
             "# with intensity classes of common practice; see that script",
             "wavenumber_cm1,transmittance_percent"]
    lines += [f"{xi:.0f},{ti:.2f}" for xi, ti in zip(x, t)]
    out.write_text("\n".join(lines) + "\n")
    print(f"wrote {out}")


if __name__ == "__main__":
    main()
