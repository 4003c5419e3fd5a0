"""The Hardin & Rocke (2005) cut-off against references that are not ours.

* c: robustbase 0.95.0's ``.MCDcons(p, alpha)`` (stored in tests/reference/mcd_robustbase.json by
  make_mcd_reference.R); c is its reciprocal.
* m for p = 1: the asymptotic variance of the consistency-corrected univariate MCD variance at N(0, 1),
  computed here by numerical integration of its influence function (derived below, not taken from the
  formula under test), gives m = 2 n / ASV.
* m and the cut-off for p = 1, 2, 5: a seeded simulation with robustbase's ``covMcd``
  (tests/reference/make_hardin_rocke_reference.R writes hardin_rocke_robustbase.json): 2 / the
  variance of the diagonal of the raw covariance, and the 0.975 and 0.99 quantiles of the squared
  distances of new N(0, I) rows from the raw estimate.

Finding: the formula agrees with these references at h/n = 1/2 (the default h) and, since the swapped
factors a and 1 - a of its v1 and v2 were corrected (2026-12-04, found by these tests), away from it.

Influence function used for p = 1. With a = h/n, q = chi2_1^{-1}(a), V0 = E[Z^2; Z^2 <= q] and the
consistency factor c_a = a / V0, the raw MCD variance is c_a / a times the second moment over the
central interval of mass a. Perturbing N(0, 1) by a point mass at z keeps that mass at a, so the
interval edge moves by (a - 1{z^2 <= q}) / (2 phi(sqrt q)) and

    IF(z) = c_a / a * ((z^2 - q) 1{z^2 <= q} + q a - V0),    ASV = E[IF(Z)^2].

(The location is 0 by symmetry and its influence enters the second moment at second order only.)
"""

from __future__ import annotations

import json
import math
from pathlib import Path

import pytest
from scipy import integrate, stats

from discaudit.stats.hardin_rocke import hardin_rocke_cutoff

REFERENCE = Path(__file__).parent / "reference"
MCD_REF = json.loads((REFERENCE / "mcd_robustbase.json").read_text())
SIM_REF = json.loads((REFERENCE / "hardin_rocke_robustbase.json").read_text())
HALF = [s for s in SIM_REF["settings"] if s["alpha"] == 0.5]
THREE_QUARTERS = [s for s in SIM_REF["settings"] if s["alpha"] == 0.75]


def _univariate_mcd_asv(a: float) -> float:
    """Asymptotic variance of the consistency-corrected univariate MCD variance at N(0, 1)."""
    q = float(stats.chi2.ppf(a, 1))
    r = math.sqrt(q)
    v0 = integrate.quad(lambda z: z * z * stats.norm.pdf(z), -r, r, epsabs=0, epsrel=1e-13)[0]
    ca = a / v0
    inside = integrate.quad(lambda z: (z * z - q + q * a - v0) ** 2 * stats.norm.pdf(z), -r, r, epsabs=0, epsrel=1e-13)[
        0
    ]
    outside = 2.0 * float(stats.norm.sf(r)) * (q * a - v0) ** 2
    return (ca / a) ** 2 * (inside + outside)


def test_c_is_the_reciprocal_of_robustbase_mcdcons() -> None:
    for row in MCD_REF["consistency_factors"]:
        # n large enough that m exceeds p - 1 at every stored (p, alpha).
        n = 10**6
        h = round(row["alpha"] * n)
        hr = hardin_rocke_cutoff(n, row["p"], h=h)
        assert hr.c == pytest.approx(1.0 / row["factor"], rel=1e-12)


def test_influence_function_check_is_consistent_at_no_trimming() -> None:
    # Sanity of the reference itself: as a -> 1 the MCD variance becomes the sample variance,
    # whose asymptotic variance at N(0, 1) is 2.
    assert _univariate_mcd_asv(1.0 - 1e-9) == pytest.approx(2.0, rel=1e-5)


def test_m_for_one_feature_matches_the_influence_function_at_half() -> None:
    n = 1000
    assert 2.0 * n / hardin_rocke_cutoff(n, 1, h=500).m == pytest.approx(_univariate_mcd_asv(0.5), rel=1e-9)


@pytest.mark.parametrize("a", [0.6, 0.75, 0.9])
def test_m_for_one_feature_matches_the_influence_function_away_from_half(a: float) -> None:
    n = 1000
    hr = hardin_rocke_cutoff(n, 1, h=round(a * n))
    assert 2.0 * n / hr.m == pytest.approx(_univariate_mcd_asv(a), rel=1e-6)


@pytest.mark.parametrize("setting", HALF, ids=lambda s: f"n{s['n']}-p{s['p']}")
def test_m_and_cutoff_match_the_robustbase_simulation_at_half(setting: dict[str, float]) -> None:
    n, p, h = int(setting["n"]), int(setting["p"]), int(setting["h"])
    hr = hardin_rocke_cutoff(n, p, h=h)
    # 200 to 300 samples estimate the variance to about 10 %; finite-sample effects add some.
    assert hr.m == pytest.approx(2.0 / setting["diag_var"], rel=0.2)
    for alpha, key in ((0.025, "fresh_q975"), (0.01, "fresh_q99")):
        cut = hardin_rocke_cutoff(n, p, h=h, alpha=alpha)
        assert cut.cutoff == pytest.approx(setting[key], rel=0.04)
        assert abs(cut.cutoff - setting[key]) <= abs(cut.chi2_cutoff - setting[key]) + 0.01 * setting[key]


@pytest.mark.parametrize("setting", THREE_QUARTERS, ids=lambda s: f"n{s['n']}-p{s['p']}")
def test_m_matches_the_robustbase_simulation_at_three_quarters(setting: dict[str, float]) -> None:
    hr = hardin_rocke_cutoff(int(setting["n"]), int(setting["p"]), h=int(setting["h"]))
    assert hr.m == pytest.approx(2.0 / setting["diag_var"], rel=0.3)
