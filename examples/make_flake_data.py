"""Invented demo data: near-infrared sorting of shredded plastic flakes at a recycling plant.

A sorting line scans each shredded flake with a near-infrared sensor and must assign it to one of
four polymer families (PET, HDPE, PP, PS) before it is blown into a bin. Each row is one flake:
reflectance at ten wavelength bands (``nir_1100`` ... ``nir_1640``, nanometres, reflectance 0-1),
flake thickness in micrometres and bulk density in g/cm3. Everything here is simulated by a
seeded generator; no real measurements are involved.

Planted on purpose, for the audit to catch:

1. **Collinear neighbouring bands.** Reflectance varies flake to flake mostly through two latent
   factors (overall brightness and spectral slope, from surface gloss and colour), so neighbouring
   bands are correlated above 0.99 within each family (VIFs in the hundreds).
2. **A thickness column on a scale thousands of times larger** than reflectance (SD of hundreds
   of micrometres against reflectance SDs of a few hundredths).
3. **A contaminated batch far from its family**: six PET flakes from one bale still carrying a
   paper label residue (much darker across all bands, thicker) keep their polymer label; together
   they move the PET mean, so they matter to LDA. Their ids are returned and printed.
4. **One family whose covariance clearly differs**: PS flakes come from foamed and solid stock,
   so their spread in brightness, spectral slope, band noise, thickness and density is three times
   that of the other families.

Run ``python examples/make_flake_data.py --output examples/data/flakes.csv``.
"""

from __future__ import annotations

import argparse
from pathlib import Path

import numpy as np
import pandas as pd

BANDS = np.array([1100, 1160, 1220, 1280, 1340, 1400, 1460, 1520, 1580, 1640])
FAMILIES = {
    # base reflectance level, absorption band centre (nm), depth, mean thickness (um), density (g/cm3)
    "PET": (0.62, 1400, 0.10, 900.0, 1.36),
    "HDPE": (0.70, 1220, 0.14, 1500.0, 0.95),
    "PP": (0.66, 1460, 0.12, 1200.0, 0.91),
    "PS": (0.58, 1640, 0.11, 1100.0, 1.04),
}
ROWS_PER_FAMILY = 150
N_CONTAMINATED = 6
CONTAMINATED_FAMILY = "PET"


def _mean_spectrum(level: float, centre: float, depth: float) -> np.ndarray:
    return level - depth * np.exp(-0.5 * ((BANDS - centre) / 90.0) ** 2)


def make_flakes(seed: int = 20261202) -> tuple[pd.DataFrame, dict[str, object]]:
    """Simulate the flake table; return it and a record of what was planted.

    Parameters
    ----------
    seed : int
        Seed of the generator; the same seed gives the same table.

    Returns
    -------
    frame : pandas.DataFrame
        Index ``flake_id``; columns ``nir_<band>``, ``thickness_um``, ``bulk_density``, ``family``.
    planted : dict
        ``contaminated`` (flake ids), ``different_covariance_family``, ``collinear_bands``,
        ``large_scale_column``.
    """
    rng = np.random.default_rng(seed)
    centred_bands = (BANDS - BANDS.mean()) / np.ptp(BANDS)
    blocks = []
    for family, (level, centre, depth, thick, dens) in FAMILIES.items():
        n = ROWS_PER_FAMILY
        spread = 3.0 if family == "PS" else 1.0
        brightness = rng.normal(0.0, 0.03 * spread, n)
        slope = rng.normal(0.0, 0.02 * spread, n)
        noise = rng.normal(0.0, 0.002 * spread, (n, BANDS.size))
        spectra = _mean_spectrum(level, centre, depth) + brightness[:, None] + slope[:, None] * centred_bands + noise
        thickness = thick + 4000.0 * brightness * (0.5 if family != "PS" else -1.0) + rng.normal(0.0, 250.0 * spread, n)
        density = dens + rng.normal(0.0, 0.01 * spread, n) + (0.4 * brightness if family == "PS" else 0.0)
        block = pd.DataFrame(spectra, columns=[f"nir_{b}" for b in BANDS])
        block["thickness_um"] = np.round(thickness, 1)
        block["bulk_density"] = np.round(density, 4)
        block["family"] = family
        blocks.append(block)
    frame = pd.concat(blocks, ignore_index=True)
    frame = frame.sample(frac=1.0, random_state=seed % (2**32)).reset_index(drop=True)
    frame.index = pd.Index([f"F{i:04d}" for i in range(1, len(frame) + 1)], name="flake_id")
    # one contaminated batch: PET flakes that kept a label residue, darker and thicker than their class
    hit = rng.choice(np.flatnonzero(frame["family"] == CONTAMINATED_FAMILY), N_CONTAMINATED, replace=False)
    bands = [f"nir_{b}" for b in BANDS]
    frame.iloc[hit, frame.columns.get_indexer(bands)] -= rng.uniform(0.25, 0.35, (N_CONTAMINATED, 1))
    frame.iloc[hit, frame.columns.get_loc("thickness_um")] += rng.uniform(1500.0, 2500.0, N_CONTAMINATED)
    frame[bands] = frame[bands].round(4)
    planted = {
        "contaminated": sorted(frame.index[hit].tolist()),
        "different_covariance_family": "PS",
        "collinear_bands": bands,
        "large_scale_column": "thickness_um",
    }
    return frame, planted


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--output", default="examples/data/flakes.csv", help="CSV file to write")
    parser.add_argument("--seed", type=int, default=20261202, help="generator seed")
    args = parser.parse_args()
    frame, planted = make_flakes(args.seed)
    out = Path(args.output)
    out.parent.mkdir(parents=True, exist_ok=True)
    frame.to_csv(out)
    print(f"wrote {len(frame)} flakes to {out}; contaminated flakes planted: {', '.join(planted['contaminated'])}")


if __name__ == "__main__":
    main()
