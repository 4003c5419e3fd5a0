"""Minimum Covariance Determinant (MCD) location and scatter: DetMCD next to FAST-MCD.

The MCD estimate of a data set with n rows and p features is the mean and covariance of the
h rows whose covariance matrix has the smallest determinant. Searches find it approximately:
from any start, "concentration steps" (C-steps) never increase the determinant and stop at a
local minimum (Rousseeuw & Van Driessen 1999); the searches differ in their starts. FAST-MCD
(Rousseeuw & Van Driessen 1999) draws many random (p+1)-subsets (500) and, for large n, works
on nested random subsets first. DetMCD (Hubert, Rousseeuw & Verdonck 2012) uses six
deterministic robust starts (:mod:`discaudit.stats._detmcd`), which costs far less.

**The default (method="auto") and why.** DetMCD alone where it was measured to reach the
objective of the combined search, the combined search elsewhere: with at most
``_DETMCD_ALONE_MAX_FEATURES`` non-constant features and at least ``_DETMCD_ALONE_MIN_ROWS`` rows
DetMCD's six starts run alone, otherwise next to 50 random starts (``method="combined"``), and the
lowest raw objective (log det of the raw h-subset covariance) wins. The comment of those
constants gives the measurement (``python benchmarks/bench_detmcd_rule.py``). The combined
search against FAST-MCD with 500 random starts, measured with
``python benchmarks/bench_mcd.py --compare``: 300 seeded cases (clean Gaussian; 5 % and 20 %
of the rows shifted; multivariate t(3); 10 % and 20 % of the rows in a tight cluster along the
direction of least variance; n = 100, 300, 1,000, 3,000, 10,000; p = 2, 5, 10, 20, 30; two
seeds), each search's raw objective against FAST-MCD's with 500 starts and the same seed,
"same" meaning within 1e-9 relative:

======================  ====  =====  =====  ==============  ===========
search                  same  below  above  above by >1e-3  above by
                                            relative        >0.05
======================  ====  =====  =====  ==============  ===========
FAST-MCD, another seed    39    136    125              40           13
DetMCD alone              14     89    197              53           23
combined                  28     94    178              35            7
======================  ====  =====  =====  ==============  ===========

"Same" is rare for any pair, FAST-MCD against itself included: the objective has many nearly
equal local minima, and which one a search stops at is partly chance. All differences above
1e-3 relative occur at n <= 1,000 for FAST-MCD and the combined search (DetMCD alone: one each at
n = 3,000 and 10,000). DetMCD alone is above FAST-MCD more often, and on the tight clusters all
six of its starts, which work in standardized coordinates, can end on subsets that hold the
cluster: log det up to 0.6 higher and, at n = 10,000, 2,581 rows flagged differently. A cheap
diagnostic cannot catch that: in those cases the six starts agree (within 3e-4 in log det) on
the wrong subset. Next to 50 random starts (the combined search) DetMCD is as close to FAST-MCD as FAST-MCD
with another seed is, or closer (flagged rows: at most 104 differ, in 67 cases more than 1 %
of n, against 145 and 73 between the two FAST-MCD seeds), at a fraction of the cost
(``--speed``, one BLAS thread, best of 7: 8.1 against 46.9 ms at n = 500, p = 8; 14.0 against
57.6 ms at n = 2,000, p = 10; 24.9 against 115.9 ms at n = 10,000, p = 10). On a working
subsample (n > 1,500) only the best 3 pooled candidates are iterated to convergence
(``_POOL_KEEP``); on all rows every one is, which on n <= 1,000 lowered the two right-hand
counts from 43 and 10 (best 3 everywhere) to 35 and 7, for 9.5 instead of 8.3 ms at n = 500,
p = 8 (at n = 2,000 converging every one would cost 21.7 instead of 14.3 ms). The constants of the combined
search are ``_AUTO_RANDOM_STARTS``, ``_COMBINED_KEEP``, ``_GROUP_KEEP``, ``_POOL_KEEP``,
``_COMBINED_ROWS``, ``_DET_FIT_ROWS`` and ``_COMBINED_FULL`` below; the search itself is
:meth:`_Search.run_combined`. ``method="random"`` keeps FAST-MCD alone (the default before
DetMCD), ``method="deterministic"`` DetMCD alone, ``method="combined"`` the combined search
everywhere (the default before the rule above).

This module needs only numpy and scipy.
"""

from __future__ import annotations

import math
import warnings
from dataclasses import dataclass
from typing import Any

import numpy as np
import numpy.typing as npt
from scipy import special
from scipy import stats as sp_stats

from discaudit.errors import DataError, DegenerateDataWarning
from discaudit.stats._detmcd import detmcd_starts
from discaudit.stats._inputs import FloatMatrix, as_matrix
from discaudit.stats._linalg import sq_distances_cholesky
from discaudit.stats.blocks import ROW_BLOCK as _ROW_BLOCK

__all__ = ["MCDResult", "mcd", "mcd_consistency_factor"]

FloatVector = npt.NDArray[np.float64]
BoolVector = npt.NDArray[np.bool_]

#: Random (p+1)-subsets drawn by FAST-MCD (Rousseeuw & Van Driessen 1999 use 500).
_N_STARTS = 500
#: Candidates kept after the two C-steps of each stage (10 in Rousseeuw & Van Driessen 1999).
_KEEP = 10
#: Above this many rows the nested-subset scheme is used (600 in Rousseeuw & Van Driessen 1999).
_NESTED_ABOVE = 600
#: Rows of one subgroup and the most subgroups of the nested scheme (300 and 5 in the paper).
_GROUP_ROWS = 300
_MAX_GROUPS = 5
#: Size of the merged set of the nested scheme (1500 in the paper).
_MERGED_ROWS = _GROUP_ROWS * _MAX_GROUPS
#: The searches mcd() offers: DetMCD next to a few random starts, DetMCD alone, FAST-MCD alone.
_METHODS = ("auto", "combined", "deterministic", "random")
#: Above this many working rows the six DetMCD estimates are computed on a random part of
#: this size (their h0-subsets are still taken among all working rows).
_DET_FIT_ROWS = 600
#: Random starts that method="combined" (and "auto" outside the rule below) runs next to the six
#: DetMCD starts (see mcd Notes).
_AUTO_RANDOM_STARTS = 50
#: method="auto" runs DetMCD alone, without random starts, on at most this many (non-constant)
#: features and at least this many rows; elsewhere DetMCD next to 50 random starts. Design choice
#: on this evidence (``python benchmarks/bench_detmcd_rule.py``, with ``--sizes`` and
#: ``--features`` for the finer grid): seeded cases of seven kinds (clean Gaussian, 5 % and 20 %
#: shifted rows, 5 %, 10 % and 20 % tight clusters, multivariate t(3)), DetMCD alone against
#: DetMCD + 50 random starts with the same seed, raw log det (divisor h). For p = 2, 3, 4 and
#: n = 800, 1,000, 1,500, 2,500, 5,000, 10,000 (756 cases, six seeds) DetMCD alone ends above by
#: more than 0.01 in 2 cases (n = 1,000, p = 2), by at most 0.012 (a determinant 1.2 % larger),
#: and flags at most 8 rows differently; the combined search with another seed ends above
#: itself by up to 0.003 and flags up to 11 rows differently. There DetMCD alone costs about
#: half (4.6 against 8.8 ms at n = 800, p = 3; 7.5 against 16.1 ms at n = 1,500, p = 4). Not
#: elsewhere: at n = 600, p = 3 it is above by up to 0.025 (3 of 42 cases above 0.01); with
#: p >= 5 the 20 % tight clusters capture all six starts (log det up to 0.66 higher, up to 406
#: rows flagged differently at n = 1,500, p = 6, 1,309 at n = 10,000, p = 13); and with
#: n <= 450 it is above by more than 0.01 in 5 % to 80 % of the cases of a cell, clean Gaussian
#: data included (up to 0.31 at n = 40, p = 2), where the random starts find lower minima.
_DETMCD_ALONE_MAX_FEATURES = 4
_DETMCD_ALONE_MIN_ROWS = 800
#: Rows of the working set of method="auto" (a random subsample when n is larger).
_COMBINED_ROWS = _MERGED_ROWS
#: Random candidates kept after their first two C-steps (on up to 600 rows; per group of
#: about 300 rows on more).
_COMBINED_KEEP = 2
_GROUP_KEEP = 1
#: Of the pooled DetMCD and random candidates, after two C-steps on a working subsample
#: (n > 1500), the best this many distinct ones are iterated to convergence there (on all
#: rows every distinct candidate is).
_POOL_KEEP = 3
#: Converged candidates of the working set carried to the C-steps on all rows.
_COMBINED_FULL = 2
#: Label of a start drawn at random.
_RANDOM_START = "random (p+1)-subset"
#: Label of the classical mean and covariance, the start of last resort.
_CLASSICAL_START = "classical mean and covariance"
#: Upper bound on C-steps when iterating a candidate to convergence.
_MAX_CSTEPS = 100
#: Work budget (in multiply-adds, n * p^2 per C-step and candidate) for the full-data stage
#: of the nested scheme; it sets how many candidates are carried to the full data.
_FULL_STAGE_BUDGET = 2.0e9
#: Up to this much work per C-step (rows * p^2) every candidate carried to the intermediate
#: subsample or the full data is iterated to convergence there; above it each gets two
#: C-steps and only the best goes on. (Rousseeuw & Van Driessen converge all ten; on seeded
#: contaminated data, n 2,000-20,000 and p 5-30, converging only the best raised the raw log
#: det by at most 0.006 and changed the flagged rows by at most 5 in 20,000, at about half the
#: time; tests/test_mcd.py checks the property.)
_CONVERGE_ALL_WORK = 2.0e6
#: From this many rows on, an intermediate random subsample of min(_MID_ROWS, n // 3) rows is
#: used (an extra level of the nested scheme: the merged candidates are iterated to
#: convergence on it before the C-steps on all rows, which then need only a few steps).
_MID_FROM = 40_000
_MID_ROWS = 20_000
#: A C-step counts as converged when log det decreases by less than this ...
_LOGDET_TOL = 1e-10
#: ... or, on all rows of the nested scheme, by less than this (a relative change of the
#: determinant of 1e-6; the remaining C-steps only swap a few rows at the boundary).
_FULL_LOGDET_TOL = 1e-6
#: A subset covariance is singular when some feature's residual variance after regressing it
#: on the preceding features (the squared Cholesky pivot over the diagonal entry, i.e. 1 - R^2)
#: falls below this.
_SINGULAR_R2 = 1e-12
#: Eigenvalues below this fraction of the largest are null directions of an exact fit.
_NULL_EIGENVALUE = 1e-9
#: A row lies on an exact-fit hyperplane when its residual is within this fraction of the
#: largest standard deviation of the fitted rows (in units of the column standard deviations),
#: or within the largest residual of the rows that revealed the fit.
_ON_PLANE = 1e-6
#: Elements of the temporary arrays of one batch of starts.
_BATCH_ELEMENTS = 1 << 22
#: Quantile of chi-square(p) below which rows are kept in the reweighting step.
_REWEIGHT_QUANTILE = 0.975
#: Singular subsets whose hyperplane is checked against all rows before the search stops
#: checking new ones (each check costs one pass over the data).
_MAX_PLANE_CHECKS = 64


@dataclass(frozen=True)
class MCDResult:
    """Minimum Covariance Determinant estimate, raw and reweighted, with robust distances.

    Attributes
    ----------
    raw_location : ndarray of shape (p,)
        Mean of the raw h-subset (the MCD location).
    raw_covariance : ndarray of shape (p, p)
        Covariance of the raw h-subset (divisor h) times ``raw_consistency_factor`` and, if
        requested, ``raw_correction_factor``.
    support : ndarray of bool, shape (n,)
        The raw h-subset (exactly ``h`` rows). In an exact fit it marks the rows on the
        hyperplane instead (``n_on_hyperplane >= h`` rows; all rows when a column is
        constant).
    raw_subset : ndarray of bool, shape (n,)
        The rows the raw estimate was computed from: ``support``, except with constant
        columns, where it is the h-subset of the fit on the other columns.
    location : ndarray of shape (p,)
        Reweighted location: mean of the rows kept by the reweighting step.
    covariance : ndarray of shape (p, p)
        Reweighted covariance: covariance of the kept rows (divisor ``n_reweighted``) times
        ``reweighted_consistency_factor`` and, if requested, ``reweighted_correction_factor``.
    distances : ndarray of shape (n,)
        Squared robust Mahalanobis distances from ``location`` and ``covariance``. Always
        finite (see Notes for the exact-fit convention).
    outliers : ndarray of bool, shape (n,)
        ``distances > cutoff``.
    raw_distances : ndarray of shape (n,)
        Squared distances from ``raw_location`` and ``raw_covariance``; the reweighting step
        keeps the rows with ``raw_distances <= chi2_p(0.975)``.
    reweighted : ndarray of bool, shape (n,)
        Rows kept by the reweighting step.
    h : int
        Size of the raw subset.
    n, p : int
        Rows and features of the input.
    p_used : int
        Dimension the distances live in: ``p`` minus the number of constant columns (and, in
        an exact fit, minus the number of null directions). Chi-square quantiles use it.
    raw_log_determinant : float
        log det of the covariance of the raw h-subset, divisor h, before any correction
        factor (the MCD objective). ``-inf`` in an exact fit.
    cutoff : float
        chi2_{p_used}(``cutoff_quantile``), the threshold applied to ``distances``.
    cutoff_quantile : float
        The quantile that was requested.
    raw_consistency_factor, reweighted_consistency_factor : float
        c(a) = a / F_{chi2(p+2)}(chi2_p^{-1}(a)) (Croux & Haesbroeck 1999), with a = h/n for
        the raw and a = n_reweighted/n for the reweighted estimate; 1 in an exact fit.
    raw_correction_factor, reweighted_correction_factor : float
        Finite-sample factors of Pison, Van Aelst & Willems (2002), 1 if not applied.
    corrections : tuple of str
        Names of what was applied to the covariances, in order.
    n_reweighted : int
        Rows kept by the reweighting step.
    n_starts : int
        Random (p+1)-subsets drawn as starts (0 with ``method="deterministic"``, and with
        ``method="auto"`` where it runs DetMCD alone).
    search : str
        Where the C-steps ran: ``"all rows"``; for ``method="random"`` with n > 600
        ``"nested subsets"``; for the other methods with n > 1500 ``"subsample, then all
        rows"``.
    random_state : int
        The seed of every random step (drawn afresh and recorded if None was passed).
    exact_fit : bool
        True when at least h rows lie on a hyperplane (the MCD covariance is singular), or a
        column is constant.
    hyperplane_normal : ndarray of shape (p,) or None
        Unit normal a of the exact-fit hyperplane {x : a'x = b} in the original units.
    hyperplane_offset : float or None
        b.
    n_on_hyperplane : int
        Rows on the hyperplane (0 when there is no exact fit).
    constant_columns : tuple of str
        Names of the columns that take a single value.
    feature_names : tuple of str
        Column names (DataFrame columns, else ``x0 .. x{p-1}``), in the order of the
        location vectors and covariance matrices.
    method : str
        The search that was asked for: ``"auto"``, ``"combined"``, ``"deterministic"`` or
        ``"random"``.
    best_start : str
        The start whose C-steps reached the raw subset: one of the six DetMCD starts
        (``"tanh correlation"``, ``"Spearman correlation"``, ``"normal scores correlation"``,
        ``"spatial sign covariance"``, ``"BACON start"``, ``"raw OGK"``), ``"random
        (p+1)-subset"``, ``"classical mean and covariance"`` (last resort) or, in an exact
        fit, ``"exact fit: rows on a hyperplane"``.
    covariance_divisor : str
        ``"rows in the subset"``: h for the raw, ``n_reweighted`` for the reweighted
        covariance.
    """

    raw_location: FloatVector
    raw_covariance: FloatMatrix
    support: BoolVector
    raw_subset: BoolVector
    location: FloatVector
    covariance: FloatMatrix
    distances: FloatVector
    outliers: BoolVector
    raw_distances: FloatVector
    reweighted: BoolVector
    h: int
    n: int
    p: int
    p_used: int
    raw_log_determinant: float
    cutoff: float
    cutoff_quantile: float
    raw_consistency_factor: float
    reweighted_consistency_factor: float
    raw_correction_factor: float
    reweighted_correction_factor: float
    corrections: tuple[str, ...]
    n_reweighted: int
    n_starts: int
    search: str
    random_state: int
    exact_fit: bool
    hyperplane_normal: FloatVector | None
    hyperplane_offset: float | None
    n_on_hyperplane: int
    constant_columns: tuple[str, ...]
    feature_names: tuple[str, ...]
    method: str
    best_start: str
    covariance_divisor: str = "rows in the subset"

    @property
    def n_outliers(self) -> int:
        """Number of rows flagged as outlying."""
        return int(self.outliers.sum())


def mcd(
    X: Any,
    support_fraction: float | None = None,
    random_state: int | None = None,
    *,
    finite_sample_correction: bool = False,
    cutoff_quantile: float = 0.975,
    n_starts: int | None = None,
    method: str = "auto",
) -> MCDResult:
    """Minimum Covariance Determinant estimate (DetMCD and FAST-MCD), with reweighting and distances.

    Finds (approximately) the h rows whose covariance matrix has the smallest determinant,
    corrects that raw estimate for consistency at the normal distribution, reweights it
    (rows with a raw squared distance beyond the chi-square(p) 0.975 quantile are dropped)
    and returns squared robust Mahalanobis distances of every row from the reweighted
    estimate together with the rows flagged as outlying.

    Parameters
    ----------
    X : array-like or DataFrame of shape (n, p)
        Numeric data, finite. DataFrame column names are kept in ``feature_names``; the
        locations and covariances are plain arrays in that column order.
    support_fraction : float in [0.5, 1] or None, default None
        Fraction of rows in the raw subset: h = ceil(support_fraction * n). None gives
        h = floor((n + p + 1) / 2), the choice with the highest breakdown point.
    random_state : int or None, default None
        Seed of every random step. None draws a fresh seed, recorded in the result, so any
        result can be repeated.
    finite_sample_correction : bool, default False
        Also multiply the raw and the reweighted covariance by the small-sample correction
        factors of Pison, Van Aelst & Willems (2002); see Notes for their provenance.
    cutoff_quantile : float in (0, 1), default 0.975
        Rows with ``distances > chi2_p(cutoff_quantile)`` are flagged in ``outliers``.
    n_starts : int or None, default None
        Random (p+1)-subsets drawn as starts. None gives, for ``method="auto"``, 0 with at
        most 4 non-constant features and at least 800 rows and 50 otherwise; 50 for
        ``method="combined"``, 500 for ``method="random"`` (as Rousseeuw & Van Driessen 1999)
        and 0 for ``method="deterministic"``. A number given with ``method="auto"`` runs the
        combined search with that many random starts.
    method : {"auto", "combined", "deterministic", "random"}, default "auto"
        The search (see Notes): the six deterministic starts of DetMCD next to ``n_starts``
        random starts, the lowest objective winning (``"combined"``); DetMCD alone
        (``"deterministic"``); FAST-MCD alone (``"random"``, the default before DetMCD);
        ``"auto"`` is DetMCD alone where it was measured to reach the combined search's
        objective (p <= 4, n >= 800) and the combined search elsewhere.

    Returns
    -------
    MCDResult
        Raw and reweighted estimates, distances, flags and every constant that was used.

    Raises
    ------
    DataError
        If ``X`` is not finite numeric two-dimensional data, has values beyond 1e150 in
        magnitude, if n <= p (every subset of the required size is singular), or if
        ``support_fraction``, ``cutoff_quantile``, ``n_starts``, ``method`` or
        ``random_state`` is out of range.

    Warns
    -----
    DegenerateDataWarning
        When a column is constant or at least h rows lie on a hyperplane (exact fit).

    See Also
    --------
    discaudit.stats.hardin_rocke.hardin_rocke_cutoff : an F-based cut-off for squared MCD
        distances that is more accurate than the chi-square one in moderate samples.

    Notes
    -----
    **Default search (method="auto").** DetMCD alone (below) with at most 4 non-constant
    features and at least 800 rows, where on seeded clean, shifted, clustered and
    heavy-tailed data it reached the combined search's raw objective as closely as that
    search with another seed reaches its own; the combined search otherwise. The module
    docstring and the comment of ``_DETMCD_ALONE_MAX_FEATURES`` give the measurement.

    **Combined search (method="combined").** The rows are first put in lexicographic order of
    their values (first column first), and every step below runs on that order, so the result
    does not depend on the order of the input rows. The work runs on a working set of
    m = min(n, 1500) rows (all rows, or a random subsample). DetMCD (Hubert, Rousseeuw &
    Verdonck 2012) supplies six deterministic starts
    (:func:`discaudit.stats._detmcd.detmcd_starts`): the columns are standardized by median
    and tau-scale, six robust estimates of their correlation (tanh-transformed, Spearman,
    normal scores, spatial sign covariance, the BACON start of the ceil(m/2) rows nearest the
    coordinate-wise median, raw OGK) are each turned into the ceil(m/2) most central rows
    (eigenvectors of the estimate, tau-scales of the projections, coordinate-wise median of
    the sphered data; for m > 600 the estimates use a random 600 of the working rows), and the
    mean and covariance of those rows give the first h-subset. Next to them run ``n_starts``
    random (p+1)-subsets as in FAST-MCD: two C-steps on all working rows, keeping the best 2
    (m <= 600), or two C-steps in groups of 300 rows keeping the best of each group (m > 600).
    The pooled candidates get two C-steps on the working set and are iterated to convergence
    (log det decreasing by less than 1e-10), all of them when m = n, the best 3 (with tolerance
    1e-6) when m < n; candidates that meet on one subset share one path. If m < n, the best 2 get two C-steps on
    all rows and the better is iterated to convergence there (for n >= 40,000 after a stage on
    min(20,000, n // 3) rows, as below). The lowest log det wins; ``best_start`` says which
    start reached it. The module docstring gives the measurements behind this search: DetMCD
    alone stops above FAST-MCD's objective more often, and is fooled by tight clusters of
    outliers that its coordinate-wise starts cannot see; 50 random starts put that right.

    **DetMCD alone (method="deterministic").** The same search without random starts; if DetMCD
    cannot start (a column has a median absolute deviation of 0, i.e. at least half its values
    are equal), 500 random starts are used instead and ``n_starts`` says so.

    **FAST-MCD (method="random").** ``n_starts`` random (p+1)-subsets (enlarged by random rows while their
    covariance is singular) each give a mean and covariance; the h rows with the smallest
    distances form the first h-subset, and each C-step replaces the h-subset by the h rows
    closest to its own mean in its own metric, which never increases the determinant
    (Rousseeuw & Van Driessen 1999, Theorem 1). With n <= 600 every start gets two C-steps on
    all rows, the best 10 are iterated to convergence. With n > 600 the nested scheme of the
    paper is used: a random subsample of m = min(n, 1500) rows is split into
    k = min(5, m // 300) groups; each group gets ceil(n_starts / k) starts with
    h_g = ceil(n_g h / n) and two C-steps, keeping its best 10; the pooled candidates get two
    C-steps on the merged set (h_m = ceil(m h / n)) and the best 10 are kept. If n <= 1500 the
    merged set is the whole data and those 10 are iterated to convergence. Otherwise the
    best n_full = min(10, max(1, 2e9 / (n p^2))) candidates go on to C-steps on all rows:
    while n p^2 <= 2e8 each is iterated to convergence, above that each gets two C-steps and
    the best one is iterated to convergence, so that the cost grows about linearly in n. For
    n >= 40,000 an extra level is inserted before that (not in the paper): the 10 merged
    candidates get two C-steps on a random subsample of min(20,000, n // 3) rows, the best
    n_full of them are iterated to convergence there, and only the best of those goes on to
    the C-steps on all rows. A candidate has converged when its
    h-subset no longer changes or its log det decreases by less than 1e-10 (1e-6, a relative
    change of the determinant of 1e-6, in the stages on all rows and on the 20,000-row
    subsample; on all rows the subset before that last small step is kept, since its
    distances are already computed). The random numbers come from
    ``numpy.random.default_rng(random_state)``; ties in the distances are broken by the
    (lexicographic) row order, so the same seed gives the same result, whatever the order of
    the input rows (identical rows are interchangeable).

    **Raw estimate.** ``raw_location`` is the mean and the uncorrected raw covariance is the
    covariance (divisor h) of the best h-subset found; ``raw_log_determinant`` is its log
    determinant (via Cholesky). ``raw_covariance`` multiplies it by the consistency factor
    c(a) = a / F_{chi2(p+2)}(chi2_p^{-1}(a)), a = h/n (Croux & Haesbroeck 1999), which makes
    it consistent for the covariance matrix of a multivariate normal distribution.

    **Reweighting.** Rows with raw squared distance <= chi2_p(0.975) are kept; ``location``
    and ``covariance`` are their mean and covariance (divisor ``n_reweighted``), the latter
    multiplied by c(a) with a = n_reweighted / n, the fraction actually kept (not a fixed
    0.975). If the kept rows have a singular covariance the raw estimate is used instead and
    ``corrections`` says so.

    **Finite-sample factors.** With ``finite_sample_correction=True`` the raw and the
    reweighted covariances are also multiplied by 1 / f(p, n, a), where f follows the
    approximation of Pison, Van Aelst & Willems (2002): for p = 1, 2 it is
    1 - exp(g0) / n^g1 at a = 0.5 and a = 0.875, for p > 2 the curve through the values
    1 + gamma_q / p^delta_q at n = q p^2 (q = 2, 3), linear in a between 0.5 and 0.875 and
    from 0.875 to 1 (where f = 1). a is the nominal fraction: 0.5 for the default h =
    floor((n + p + 1) / 2), else ``support_fraction`` (as robustbase's ``covMcd`` does with
    its ``alpha``). The constants are checked against R's robustbase 0.95.0 (``.MCDcnp2``,
    ``.MCDcnp2.rew``, and the ``raw.cnp2`` and ``cnp2`` that ``covMcd(use.correction = TRUE)``
    applies on iris and wine), with which they agree to 1e-10 wherever robustbase uses the same
    curve (tests/test_mcd_robustbase.py). They differ where robustbase reads its table of
    simulated factors instead: at a = 0.5 with p <= 9 and n at most 2, 6, 10, 13, 16, 18, 20,
    20, 20 for p = 1, ..., 9 (e.g. p = 8, n = 20: raw 2.068 here, 1.995 in robustbase;
    reweighted 3.664 and 1.845). We keep the curve there; an audit never reaches those sizes,
    since it fits the MCD only with at least ``Config.robust_min_rows_per_feature`` (10) rows
    per feature. In our
    simulations of standard normal samples (n = 20 to 400,
    p = 2 and 5) the raw estimate with the consistency factor has det^(1/p) below 1 (0.61 at
    n = 20, p = 2; 0.91 at n = 100, p = 2) and the factors bring it close to 1 for n >= 100
    (undercorrecting at the smallest n); its mean diagonal, however, is already above 1
    (1.13 at n = 40, p = 2) and the factors raise it further. Treat the option as
    experimental. If f <= 0 (tiny n) no factor is applied and ``corrections`` says so.

    **Distances and flags.** ``distances`` are computed with a Cholesky factor and triangular
    solves in row blocks (during the search, the distances of a batch of starts come from one
    stacked solve with their Cholesky factors; nothing is inverted); ``outliers`` are the rows with ``distances`` above
    chi2_{p_used}(cutoff_quantile) (Rousseeuw & van Zomeren 1990). For moderate n the
    chi-square cut-off flags too many rows; the Hardin-Rocke cut-off is an alternative.

    **Degenerate data.** n <= p raises DataError. Constant columns are set aside: the search
    runs on the other columns, the location gets the constant value, the covariance zero rows
    and columns, ``exact_fit`` is True with the constant column as hyperplane (all n rows on
    it, all marked in ``support``; ``raw_subset`` holds the h-subset of the fit on the other
    columns) and a DegenerateDataWarning names the columns; if every column is constant (all
    rows identical) all distances are 0. Columns of extreme magnitude (beyond 2^+-256) are
    divided by powers of two for the search, which is exact; covariance entries of columns
    near 1e-300 then underflow to 0 in the result, while distances are unaffected. When at least h rows lie on a hyperplane (repeated rows,
    discrete features, an exact linear relation in most rows) the MCD determinant is 0 and
    the search stops (``exact_fit`` True): ``support`` marks the rows on the hyperplane, the
    raw and reweighted location and covariance are the mean and covariance (divisor
    ``n_on_hyperplane``) of those rows, no consistency factor is applied, ``hyperplane_normal``
    is the unit normal with the smallest variance among them (if they span a smaller affine
    subspace, one of its normals), and the distances follow this convention, finite for
    JSON: a row on the hyperplane gets its squared distance within the hyperplane (the
    Mahalanobis distance restricted to the directions in which those rows vary); a row off
    it gets that distance plus ``cutoff * (1 + (r / tol)^2)``, where r is its residual from
    the hyperplane and tol the on-plane tolerance (in units of the column standard
    deviations), so it is always flagged.

    The estimate of a given subset is affine equivariant, and so is the FAST-MCD search when
    it finds the same subset; the DetMCD starts are only equivariant under column shifts and
    positive column scalings (which also keep the lexicographic row order, so the default
    search is exactly equivariant under them), and after a general affine map the default
    search may stop at another, equally good local minimum (the tests measure a log det
    difference of 0.03 at n = 80 and the same flags). The tests check this, agreement with
    R's robustbase (tests/test_mcd_robustbase.py), with scikit-learn's
    ``MinCovDet``, and the exact optimum by exhaustive search on small data.

    References
    ----------
    Rousseeuw, P. J. (1984). Least median of squares regression. Journal of the American
    Statistical Association 79, 871-880.

    Rousseeuw, P. J. and Van Driessen, K. (1999). A fast algorithm for the minimum
    covariance determinant estimator. Technometrics 41, 212-223.

    Croux, C. and Haesbroeck, G. (1999). Influence function and efficiency of the minimum
    covariance determinant scatter matrix estimator. Journal of Multivariate Analysis 71,
    161-190.

    Pison, G., Van Aelst, S. and Willems, G. (2002). Small sample corrections for LTS and
    MCD. Metrika 55, 111-123.

    Hubert, M., Rousseeuw, P. J. and Verdonck, T. (2012). A deterministic algorithm for robust
    location and scatter. Journal of Computational and Graphical Statistics 21, 618-637.

    Maronna, R. A. and Zamar, R. H. (2002). Robust estimates of location and dispersion for
    high-dimensional datasets. Technometrics 44, 307-317.

    Rousseeuw, P. J. and van Zomeren, B. C. (1990). Unmasking multivariate outliers and
    leverage points. Journal of the American Statistical Association 85, 633-639.

    Examples
    --------
    >>> import numpy as np
    >>> from discaudit.stats.mcd import mcd
    >>> rng = np.random.default_rng(0)
    >>> X = rng.standard_normal((200, 3))
    >>> X[:10] += 8.0                       # ten planted outliers
    >>> res = mcd(X, random_state=0)
    >>> bool(res.outliers[:10].all())
    True

    All ten planted rows lie far beyond the chi-square(3) 0.975 cut-off of the robust fit.
    """
    data, names = as_matrix(X, min_rows=2)
    n, p = data.shape
    # as_matrix has already refused values whose squares would overflow (check_magnitude).
    if n <= p:
        raise DataError(
            f"X has {n} rows and {p} features; the MCD needs more rows than features "
            f"(n > p, better n > 2p) because every subset of {p} or fewer rows has a singular "
            "covariance. Drop features or add rows."
        )
    h = _support_size(n, p, support_fraction)
    quantile = _check_quantile(cutoff_quantile)
    method = _check_method(method)
    starts = _check_starts(n_starts, method)
    seed = _resolve_seed(random_state)
    rng = np.random.default_rng(seed)

    constant = np.ptp(data, axis=0) == 0
    constant_names = tuple(names[j] for j in np.flatnonzero(constant))
    common: dict[str, Any] = {
        "h": h,
        "method": method,
        "random_state": seed,
        "cutoff_quantile": quantile,
        "feature_names": tuple(names),
        "constant_columns": constant_names,
    }
    if constant.any():
        warnings.warn(
            f"X has constant columns {list(constant_names)}; the MCD is computed on the other "
            "columns and reported as an exact fit (drop constant columns to silence this).",
            DegenerateDataWarning,
            stacklevel=2,
        )
    if constant.all():
        return _all_rows_identical(data, common)
    varying = np.flatnonzero(~constant)
    sub = data[:, varying] if constant.any() else data
    power = _binary_exponents(sub)
    if power.any():
        sub = np.ldexp(sub, -power)  # exact: powers of two only change exponents
    if starts is None:  # method="auto" with the default number of starts: the measured rule
        starts = _auto_random_starts(n, sub.shape[1])
    order = _canonical_order(sub)
    # The small-sample factors are functions of the nominal fraction: 0.5 for the default h.
    alpha = (0.5 if support_fraction is None else float(support_fraction)) if finite_sample_correction else None
    fit = _unpermute(_fit(sub[order], h, rng, starts, alpha, quantile, method), order)
    if power.any():
        fit = _rescale(fit, power)
    if fit["exact_fit"]:
        warnings.warn(
            f"{fit['n_on_hyperplane']} of {n} rows (at least h = {h}) lie on a hyperplane, so "
            "the MCD covariance is singular (exact fit); distances follow the exact-fit "
            "convention of mcd's Notes. Repeated rows or discrete features cause this.",
            DegenerateDataWarning,
            stacklevel=2,
        )
    if constant.any():
        fit = _embed(fit, data, varying, constant)
    return MCDResult(n=n, p=p, **fit, **common)


def mcd_consistency_factor(alpha: float, p: int) -> float:
    """Consistency factor c(a) = a / F_{chi2(p+2)}(chi2_p^{-1}(a)) of the MCD covariance.

    Multiplying the covariance of the h = a n most central rows of a p-variate normal sample
    by c(a) makes it consistent for the covariance matrix (Croux & Haesbroeck 1999). c(1) = 1.

    Parameters
    ----------
    alpha : float in (0, 1]
        Fraction of rows in the subset.
    p : int
        Dimension.

    Returns
    -------
    float
        c(alpha) >= 1.

    References
    ----------
    Croux, C. and Haesbroeck, G. (1999). Influence function and efficiency of the minimum
    covariance determinant scatter matrix estimator. Journal of Multivariate Analysis 71,
    161-190.

    Examples
    --------
    >>> round(mcd_consistency_factor(0.5, 1), 4)   # 0.5 / P(chi2_3 <= 0.4549)
    7.0101
    """
    if not 0.0 < alpha <= 1.0:
        raise DataError(f"alpha must be in (0, 1]; got {alpha}.")
    if alpha >= 1.0:
        return 1.0
    q = _chi2_ppf(alpha, p)
    return float(alpha / special.gammainc((p + 2) / 2.0, q / 2.0))


def _chi2_ppf(q: float, k: int) -> float:
    """chi2_k^{-1}(q) = 2 P^{-1}(k/2, q), P the regularized lower incomplete gamma function.

    The same number as ``scipy.stats.chi2.ppf`` (tests/test_mcd.py), without its overhead.
    """
    return float(2.0 * special.gammaincinv(k / 2.0, q))


# ----------------------------------------------------------------------------------------
# validation


def _support_size(n: int, p: int, support_fraction: float | None) -> int:
    if support_fraction is None:
        return (n + p + 1) // 2
    if isinstance(support_fraction, bool) or not isinstance(support_fraction, (int, float, np.floating, np.integer)):
        raise DataError(f"support_fraction must be a number in [0.5, 1] or None; got {support_fraction!r}.")
    value = float(support_fraction)
    if not 0.5 <= value <= 1.0:
        raise DataError(
            f"support_fraction must be in [0.5, 1]; got {value}. Below 0.5 the MCD no longer "
            "describes the majority of the rows; use None for the default h = floor((n+p+1)/2)."
        )
    h = math.ceil(value * n - 1e-9)
    if h <= p:
        raise DataError(
            f"support_fraction={value} gives h = {h} rows for {p} features; h must exceed p. "
            "Raise support_fraction or use None."
        )
    return h


def _check_quantile(q: float) -> float:
    try:
        value = float(q)
    except (TypeError, ValueError):
        raise DataError(f"cutoff_quantile must be a number in (0, 1); got {q!r}.") from None
    if not 0.0 < value < 1.0:
        raise DataError(f"cutoff_quantile must be in (0, 1); got {value} (0.975 is usual).")
    return value


def _check_method(method: str) -> str:
    if method not in _METHODS:
        raise DataError(f"method must be one of {list(_METHODS)}; got {method!r} ('auto' is usual).")
    return method


def _check_starts(n_starts: int | None, method: str) -> int | None:
    """The number of random starts asked for; None for method="auto" without ``n_starts`` (see
    :func:`_auto_random_starts`)."""
    if n_starts is None:
        return {"auto": None, "combined": _AUTO_RANDOM_STARTS, "random": _N_STARTS, "deterministic": 0}[method]
    if isinstance(n_starts, bool) or not isinstance(n_starts, (int, np.integer)) or n_starts < 0:
        raise DataError(f"n_starts must be a non-negative integer or None; got {n_starts!r}.")
    if n_starts == 0 and method == "random":
        raise DataError("n_starts must be positive with method='random' (500 is usual).")
    return int(n_starts)


def _auto_random_starts(n: int, p: int) -> int:
    """Random starts of method="auto": none (DetMCD alone) for p <= 4 and n >= 800, else 50.

    ``p`` counts the non-constant columns the search runs on. See the module notes for the
    measurement behind the rule.
    """
    alone = p <= _DETMCD_ALONE_MAX_FEATURES and n >= _DETMCD_ALONE_MIN_ROWS
    return 0 if alone else _AUTO_RANDOM_STARTS


def _resolve_seed(random_state: int | None) -> int:
    if random_state is None:
        return int(np.random.SeedSequence().generate_state(1)[0])
    if isinstance(random_state, bool) or not isinstance(random_state, (int, np.integer)):
        raise DataError(
            f"random_state must be a non-negative integer or None; got {random_state!r}. "
            "Pass an integer seed so the result is repeatable."
        )
    if random_state < 0:
        raise DataError(f"random_state must be non-negative; got {random_state}.")
    return int(random_state)


# ----------------------------------------------------------------------------------------
# batched linear algebra


def _batch_moments(Y: FloatMatrix, idx: npt.NDArray[np.intp]) -> tuple[FloatMatrix, npt.NDArray[np.float64]]:
    """Means (B, p) and covariances (B, p, p), divisor k, of the row subsets ``Y[idx[b]]``."""
    B, k = idx.shape
    p = Y.shape[1]
    mu = np.empty((B, p))
    S = np.empty((B, p, p))
    step = max(1, _BATCH_ELEMENTS // max(1, k * p))
    for a in range(0, B, step):
        G = Y[idx[a : a + step]]
        m = G.mean(axis=1)
        G -= m[:, None, :]
        mu[a : a + step] = m
        S[a : a + step] = np.matmul(G.transpose(0, 2, 1), G) / k
    return mu, S


def _batch_cholesky(
    S: npt.NDArray[np.float64], scale: FloatVector, floor: FloatVector
) -> tuple[npt.NDArray[np.float64], FloatVector, BoolVector]:
    """Lower Cholesky factors, log-determinants and singularity flags of a stack of covariances.

    The factorization runs on the covariances rescaled by the column standard deviations
    ``scale`` of the data and is scaled back. A covariance is singular when some column's
    residual variance after regressing it on the preceding columns (its squared Cholesky
    pivot) is below ``_SINGULAR_R2`` times its variance (1 - R^2 < 1e-12), or below
    ``floor``, the rounding noise of that column in units of its variance (so a column that is
    constant within the subset up to rounding counts as constant).
    """
    Ss = S / scale[:, None] / scale[None, :]
    B = S.shape[0]
    ok = np.ones(B, dtype=bool)
    try:
        Ls = np.linalg.cholesky(Ss)
    except np.linalg.LinAlgError:
        Ls = np.zeros_like(Ss)
        for b in range(B):
            try:
                Ls[b] = np.linalg.cholesky(Ss[b])
            except np.linalg.LinAlgError:
                ok[b] = False
    pivots = np.diagonal(Ls, axis1=1, axis2=2)
    diag = np.diagonal(Ss, axis1=1, axis2=2)
    limit = np.maximum(_SINGULAR_R2 * diag, floor[None, :])
    singular = ~ok | ~(pivots**2 > limit).all(axis=1) | ~(diag > floor[None, :]).all(axis=1)
    safe = np.where(singular[:, None], 1.0, pivots)
    logdet = 2.0 * np.log(safe).sum(axis=1) + 2.0 * np.log(scale).sum()
    logdet[singular] = -np.inf
    L = Ls * scale[None, :, None]
    return L, logdet, singular


def _batch_distances(Y: FloatMatrix, mu: FloatMatrix, L: npt.NDArray[np.float64]) -> FloatMatrix:
    """Squared Mahalanobis distances (B, m) of the rows of Y from B (mean, Cholesky) pairs."""
    out = np.empty((mu.shape[0], Y.shape[0]))
    for b in range(mu.shape[0]):
        # One BLAS triangular solve per candidate: about 3x faster than numpy's stacked
        # (LU-based) solve over all candidates, and the loop is over tens of candidates.
        out[b] = sq_distances_cholesky(Y, mu[b], L[b])
    return out


def _masked_sums(X: FloatMatrix, mask: BoolVector, shift: FloatVector) -> tuple[FloatVector, FloatMatrix]:
    """Sum and scatter matrix about ``shift`` of the masked rows, accumulated in row blocks."""
    p = X.shape[1]
    total = np.zeros(p)
    scatter = np.zeros((p, p))
    for a in range(0, X.shape[0], _ROW_BLOCK):
        A = X[a : a + _ROW_BLOCK][mask[a : a + _ROW_BLOCK]] - shift
        total += A.sum(axis=0)
        scatter += A.T @ A
    return total, scatter


def _masked_moments(X: FloatMatrix, mask: BoolVector, shift: FloatVector) -> tuple[FloatVector, FloatMatrix]:
    """Mean and covariance (divisor = rows) of the masked rows, accumulated in row blocks.

    Sums are taken about ``shift`` (pass the mean of the rows, or a nearby point), which keeps
    the one-pass formula accurate.
    """
    total, scatter = _masked_sums(X, mask, shift)
    count = max(1, int(mask.sum()))
    delta = total / count
    S = scatter / count - np.outer(delta, delta)
    return shift + delta, (S + S.T) / 2.0


def _column_scale(X: FloatMatrix, rng: np.random.Generator) -> tuple[FloatVector, FloatVector]:
    """Column standard deviations and absolute means (of a random sample of rows when n is large).

    They only set the units of the singularity and exact-fit tolerances, so a sample of
    _MID_ROWS rows suffices; a column that is constant in the sample gets its full-data values.
    """
    n = X.shape[0]
    sample = X if n <= _MID_ROWS else X[np.sort(rng.choice(n, size=_MID_ROWS, replace=False))]
    scale = sample.std(axis=0)
    magnitude = np.abs(sample.mean(axis=0))
    for j in np.flatnonzero(scale == 0):
        scale[j] = X[:, j].std()
        magnitude[j] = abs(X[:, j].mean())
    return scale, magnitude


def _masked_mean(X: FloatMatrix, mask: BoolVector) -> FloatVector:
    """Mean of the masked rows, accumulated in row blocks."""
    total = np.zeros(X.shape[1])
    for a in range(0, X.shape[0], _ROW_BLOCK):
        total += X[a : a + _ROW_BLOCK][mask[a : a + _ROW_BLOCK]].sum(axis=0)
    return total / int(mask.sum())


def _smallest(d: FloatVector, h: int) -> BoolVector:
    mask = np.zeros(d.shape[0], dtype=bool)
    mask[np.argpartition(d, h - 1)[:h]] = True
    return mask


# ----------------------------------------------------------------------------------------
# the search


@dataclass(frozen=True)
class _Candidates:
    """Candidates after C-steps: means, Cholesky factors, log dets and subsets of the survivors,
    their positions among the candidates passed in and the first candidate of each one's path."""

    mu: FloatMatrix
    L: npt.NDArray[np.float64]
    logdet: FloatVector
    subsets: npt.NDArray[np.intp]
    survivors: npt.NDArray[np.intp]
    leader: npt.NDArray[np.intp]


@dataclass(frozen=True)
class _Outcome:
    """Result of a search: the raw h-subset, the distances from its fit and a point near its mean
    when at hand, the scheme, the start whose C-steps reached it and the number of random
    starts drawn."""

    support: BoolVector
    distances: FloatVector | None
    near_mean: FloatVector | None
    scheme: str
    winner: str
    n_random: int


class _ExactFitFound(Exception):
    """Raised inside the search when at least h rows lie on a hyperplane."""

    def __init__(self, on_plane: BoolVector) -> None:
        super().__init__("exact fit")
        self.on_plane = on_plane


class _Search:
    """FAST-MCD on a data matrix without constant columns."""

    def __init__(self, X: FloatMatrix, h: int, rng: np.random.Generator, n_starts: int) -> None:
        self.X = X
        self.n, self.p = X.shape
        self.h = h
        self.rng = rng
        self.n_starts = n_starts
        self.scale, magnitude = _column_scale(X, rng)
        # Rounding noise of a column's variance, in units of that variance: values of size
        # |x| carry errors of about eps |x|; 64 eps leaves room for the sums.
        self.floor = (64.0 * np.finfo(np.float64).eps * (magnitude + self.scale) / self.scale) ** 2
        self.plane_checks = 0
        self.checked: set[tuple[float, ...]] = set()

    # -- exact fit -------------------------------------------------------------------------

    def check_plane(self, rows: npt.NDArray[np.intp], mu: FloatVector, S: FloatMatrix) -> None:
        """Test whether the hyperplane of a singular subset holds at least h of all rows."""
        if self.plane_checks >= _MAX_PLANE_CHECKS:
            return
        Ss = S / self.scale[:, None] / self.scale[None, :]
        lam, V = np.linalg.eigh((Ss + Ss.T) / 2.0)
        top = max(float(lam[-1]), 0.0)
        null = lam <= _NULL_EIGENVALUE * top
        null[0] = True
        N = V[:, null]
        key = tuple(np.round(N[:, 0] * np.sign(N[np.argmax(np.abs(N[:, 0])), 0]), 6)) + (N.shape[1],)
        if key in self.checked:
            return
        self.checked.add(key)
        self.plane_checks += 1
        resid = self._plane_residuals(mu, N)
        tol = max(float(resid[rows].max()) * (1.0 + 1e-9), _ON_PLANE * math.sqrt(top), 1e-12)
        on = resid <= tol
        if int(on.sum()) >= self.h:
            raise _ExactFitFound(on)

    def _plane_residuals(self, mu: FloatVector, N: FloatMatrix) -> FloatVector:
        out = np.empty(self.n)
        for a in range(0, self.n, _ROW_BLOCK):
            Z = ((self.X[a : a + _ROW_BLOCK] - mu) / self.scale) @ N
            out[a : a + _ROW_BLOCK] = np.sqrt(np.einsum("ij,ij->i", Z, Z))
        return out

    # -- batched stages --------------------------------------------------------------------

    def starts(
        self, rows: npt.NDArray[np.intp], h_local: int, count: int
    ) -> tuple[FloatMatrix, npt.NDArray[np.float64]]:
        """Means and Cholesky factors of ``count`` random (p+1)-subsets of ``X[rows]``.

        Subsets with a singular covariance are enlarged by further random rows of the group
        until they are not (Rousseeuw & Van Driessen 1999, Section 3); a subset that is still
        singular at h_local rows is checked for an exact fit and dropped.
        """
        Y = self.X[rows]
        m, p = Y.shape
        k = min(p + 1, h_local)
        order = np.argsort(self.rng.random((count, m)), axis=1)
        mu, S = _batch_moments(Y, order[:, :k])
        L, _, singular = _batch_cholesky(S, self.scale, self.floor)
        first = k
        while singular.any() and k < h_local:
            k = min(h_local, k + 1 + (k - first) // 8)
            which = np.flatnonzero(singular)
            mu_w, S_w = _batch_moments(Y, order[which, :k])
            L_w, _, sing_w = _batch_cholesky(S_w, self.scale, self.floor)
            mu[which], S[which], L[which] = mu_w, S_w, L_w
            singular[which] = sing_w
        for b in np.flatnonzero(singular):
            self.check_plane(rows[order[b, :k]], mu[b], S[b])
        keep = ~singular
        return mu[keep], L[keep]

    def csteps(
        self,
        rows: npt.NDArray[np.intp],
        h_local: int,
        mu: FloatMatrix,
        L: npt.NDArray[np.float64],
        steps: int,
        tol: float = _LOGDET_TOL,
    ) -> tuple[FloatMatrix, npt.NDArray[np.float64], FloatVector, npt.NDArray[np.intp]]:
        """Up to ``steps`` C-steps of every candidate on ``X[rows]``; returns mu, L, log det, subsets.

        A candidate stops early once it has converged (subset unchanged or log det decrease
        below ``tol``); singular candidates are checked for an exact fit and dropped.
        """
        out = self.tracked_csteps(rows, h_local, mu, L, steps, tol)
        return out.mu, out.L, out.logdet, out.subsets

    def tracked_csteps(
        self,
        rows: npt.NDArray[np.intp],
        h_local: int,
        mu: FloatMatrix,
        L: npt.NDArray[np.float64],
        steps: int,
        tol: float = _LOGDET_TOL,
        *,
        merge: bool = False,
    ) -> _Candidates:
        """:meth:`csteps`, also saying which candidates survived and, with ``merge``, which met.

        With ``merge=True`` a candidate whose subset equals that of an earlier candidate after
        some C-step stops there and shares that candidate's final state (the C-step is a
        function of the subset, so both would follow the same path); ``leader`` maps each
        survivor to the first candidate of its path.
        """
        Y = self.X[rows]
        B = mu.shape[0]
        logdet = np.full(B, np.inf)
        idx = np.zeros((B, h_local), dtype=np.intp)
        active = np.arange(B)
        alive = np.ones(B, dtype=bool)
        leader = np.arange(B)
        for _ in range(steps):
            if active.size == 0:
                break
            d = _batch_distances(Y, mu[active], L[active])
            new_idx = np.sort(np.argpartition(d, h_local - 1, axis=1)[:, :h_local], axis=1)
            mu_new, S_new = _batch_moments(Y, new_idx)
            L_new, ld_new, singular = _batch_cholesky(S_new, self.scale, self.floor)
            for j in np.flatnonzero(singular):
                self.check_plane(rows[new_idx[j]], mu_new[j], S_new[j])
            same = (new_idx == idx[active]).all(axis=1)
            done = same | (ld_new >= logdet[active] - tol) | singular
            if merge:
                # A few candidates at most: pairwise comparison beats np.unique(axis=0).
                for a in range(1, active.size):
                    for b in range(a):
                        if leader[active[b]] == active[b] and np.array_equal(new_idx[a], new_idx[b]):
                            leader[active[a]] = active[b]
                            done[a] = True
                            break
            mu[active], L[active], idx[active] = mu_new, L_new, new_idx
            logdet[active] = ld_new
            alive[active[singular]] = False
            active = active[~done]
        while not np.array_equal(leader, leader[leader]):
            leader = leader[leader]
        followers = np.flatnonzero(leader != np.arange(B))
        mu[followers], L[followers], idx[followers] = (
            mu[leader[followers]],
            L[leader[followers]],
            idx[leader[followers]],
        )
        logdet[followers] = logdet[leader[followers]]
        alive[followers] = alive[leader[followers]]
        keep = np.flatnonzero(alive & np.isfinite(logdet))
        return _Candidates(mu[keep], L[keep], logdet[keep], idx[keep], keep, leader[keep])

    def best(
        self, mu: FloatMatrix, L: npt.NDArray[np.float64], logdet: FloatVector, idx: Any, keep: int
    ) -> tuple[Any, ...]:
        order = np.argsort(logdet, kind="stable")[:keep]
        return mu[order], L[order], logdet[order], idx[order]

    # -- drivers ---------------------------------------------------------------------------

    def run(self) -> tuple[BoolVector, FloatVector | None, FloatVector | None, str]:
        """Best raw h-subset (mask over all rows), its distances and mean if at hand, the scheme."""
        if self.n <= _NESTED_ABOVE:
            rows = np.arange(self.n)
            mu, L = self.starts(rows, self.h, self.n_starts)
            mu, L, ld, idx = self.csteps(rows, self.h, mu, L, 2)
            mu, L, ld, idx = self.best(mu, L, ld, idx, _KEEP)
            mu, L, ld, idx = self.csteps(rows, self.h, mu, L, _MAX_CSTEPS)
            return self._finish_small(rows, mu, L, ld, idx), None, None, "all rows"

        m = min(self.n, _MERGED_ROWS)
        sub = np.sort(self.rng.choice(self.n, size=m, replace=False)) if m < self.n else np.arange(self.n)
        groups = np.array_split(self.rng.permutation(sub), max(1, min(_MAX_GROUPS, m // _GROUP_ROWS)))
        pool_mu, pool_L = [], []
        per_group = max(1, -(-self.n_starts // len(groups)))
        for g in groups:
            h_g = self._local_h(g.size)
            mu, L = self.starts(g, h_g, per_group)
            mu, L, ld, idx = self.csteps(g, h_g, mu, L, 2)
            mu, L, _, _ = self.best(mu, L, ld, idx, _KEEP)
            pool_mu.append(mu)
            pool_L.append(L)
        mu, L = np.concatenate(pool_mu), np.concatenate(pool_L)
        if mu.shape[0] == 0:
            mu, L = self._fallback_start(sub)
        mu, L, ld, idx = self.csteps(sub, self._local_h(m), mu, L, 2)
        mu, L, ld, idx = self.best(mu, L, ld, idx, _KEEP)
        if mu.shape[0] == 0:
            mu, L = self._fallback_start(sub)
        if m == self.n:
            mu, L, ld, idx = self.csteps(sub, self.h, mu, L, _MAX_CSTEPS)
            return self._finish_small(sub, mu, L, ld, idx), None, None, "nested subsets"
        n_full = int(max(1, min(_KEEP, _FULL_STAGE_BUDGET // (float(self.n) * self.p * self.p))))
        if self.n >= _MID_FROM:
            mid = np.sort(self.rng.choice(self.n, size=min(_MID_ROWS, self.n // 3), replace=False))
            h_mid = self._local_h(mid.size)
            cheap_mid = float(mid.size) * self.p * self.p <= _CONVERGE_ALL_WORK
            mu, L, ld, idx = self.csteps(mid, h_mid, mu, L, 2)
            mu, L, ld, idx = self.best(mu, L, ld, idx, n_full if cheap_mid else 1)
            mu, L, ld, idx = self.csteps(mid, h_mid, mu, L, _MAX_CSTEPS, tol=_FULL_LOGDET_TOL)
            if mu.shape[0] == 0:
                mu, L = self._fallback_start(mid)
            else:
                # The subsample has ranked the candidates; only the best goes on to all rows.
                mu, L, ld, idx = self.best(mu, L, ld, idx, 1)
        state = self._full_stage(mu[:n_full], L[:n_full])
        return state.support, state.distances, state.location, "nested subsets"

    def det_starts(self, rows: npt.NDArray[np.intp]) -> tuple[FloatMatrix, npt.NDArray[np.float64], list[str]]:
        """Means, Cholesky factors and names of the DetMCD starts formed on ``X[rows]``.

        Each start's h0-subset, h0 = ceil(m/2) of the m rows (see
        :func:`discaudit.stats._detmcd.detmcd_starts`), gives a mean and covariance; the first
        C-step then takes the h rows closest to them (Hubert, Rousseeuw & Verdonck 2012,
        Section 3). With m > ``_DET_FIT_ROWS`` the six estimates come from a random part of
        that many rows (a cost bound; the paper uses all rows), the h0-subsets are still the
        most central of all m rows. A singular h0-subset is checked for an exact fit and
        dropped; no start at all when a column has zero robust scale.
        """
        Y = self.X[rows]
        h0 = min(rows.size, max(self.p + 1, -(-rows.size // 2)))
        fit_rows = None
        if rows.size > _DET_FIT_ROWS:
            fit_rows = np.sort(self.rng.choice(rows.size, size=_DET_FIT_ROWS, replace=False))
        starts = detmcd_starts(Y, h0, fit_rows)
        if starts is None or starts.subsets.shape[0] == 0:
            return np.empty((0, self.p)), np.empty((0, self.p, self.p)), []
        mu, S = _batch_moments(Y, starts.subsets)
        L, _, singular = _batch_cholesky(S, self.scale, self.floor)
        for b in np.flatnonzero(singular):
            self.check_plane(rows[starts.subsets[b]], mu[b], S[b])
        formed = np.flatnonzero(~singular)
        return mu[formed], L[formed], [starts.names[i] for i in formed]

    def run_combined(self, n_random: int) -> _Outcome:
        """DetMCD's six starts next to ``n_random`` random starts; the lowest log det wins.

        Everything runs on a working set of m = min(n, _COMBINED_ROWS) rows (all rows, or a
        random subsample). The random starts get their first two C-steps
        (:meth:`_random_candidates`) and the best join the DetMCD starts (:meth:`det_starts`);
        the pool gets two C-steps on the working set, and the distinct candidates (the best
        ``_POOL_KEEP`` if m < n) are iterated to convergence there (starts that meet on the
        same subset share one path). If m < n, the best ``_COMBINED_FULL`` get two C-steps on all rows and
        the better one is iterated to convergence (for n >= 40,000 they converge on an
        intermediate subsample first, as in :meth:`run`, and only the best goes on).
        """
        n, p = self.n, self.p
        m = min(n, _COMBINED_ROWS)
        rows = np.arange(n) if m == n else np.sort(self.rng.choice(n, size=m, replace=False))
        h_local = self.h if m == n else self._local_h(m)
        mu_d, L_d, names = self.det_starts(rows)
        if not names:
            # DetMCD cannot start (a column has zero robust scale, or every h0-subset is
            # singular): FAST-MCD with at least 500 random starts.
            self.n_starts = max(n_random, _N_STARTS)
            support, d_unc, near_mean, scheme = self.run()
            return _Outcome(support, d_unc, near_mean, scheme, _RANDOM_START, self.n_starts)
        mu_r, L_r = np.empty((0, p)), np.empty((0, p, p))
        if n_random:
            mu_r, L_r = self._random_candidates(rows, h_local, n_random)
        labels = names + [_RANDOM_START] * mu_r.shape[0]
        tol = _LOGDET_TOL if m == n else _FULL_LOGDET_TOL
        first = self.tracked_csteps(
            rows, h_local, np.concatenate([mu_d, mu_r]), np.concatenate([L_d, L_r]), 2, tol, merge=True
        )
        # Candidates that met share one entry. On all rows every distinct one goes on (as in
        # DetMCD, whose six starts are all iterated); on a subsample the best _POOL_KEEP.
        distinct = np.flatnonzero(first.leader == first.survivors)
        keep = distinct[np.argsort(first.logdet[distinct], kind="stable")[: distinct.size if m == n else _POOL_KEEP]]
        out = self.tracked_csteps(rows, h_local, first.mu[keep], first.L[keep], _MAX_CSTEPS, tol, merge=True)
        won = [labels[first.survivors[keep[i]]] for i in out.survivors]
        if out.logdet.size == 0:
            mu0, L0 = self._fallback_start(np.arange(n))
            out = self.tracked_csteps(np.arange(n), self.h, mu0, L0, _MAX_CSTEPS)
            won, rows, m = [_CLASSICAL_START], np.arange(n), n
            if out.logdet.size == 0:  # pragma: no cover - an exact fit is raised before this
                raise DataError("the MCD search found no nonsingular h-subset; the data are degenerate.")
        order = np.argsort(out.logdet, kind="stable")
        if m == n:
            support = np.zeros(n, dtype=bool)
            support[rows[out.subsets[order[0]]]] = True
            return _Outcome(support, None, None, "all rows", won[order[0]], n_random)
        keep = order[:_COMBINED_FULL]
        mu, L, won = out.mu[keep], out.L[keep], [won[i] for i in keep]
        if n >= _MID_FROM:
            # As in :meth:`run`: the candidates converge on an intermediate subsample first and
            # only the best goes on to all rows.
            mid = np.sort(self.rng.choice(n, size=min(_MID_ROWS, n // 3), replace=False))
            stage = self.tracked_csteps(mid, self._local_h(mid.size), mu, L, _MAX_CSTEPS, _FULL_LOGDET_TOL)
            if stage.logdet.size:
                b = int(np.argmin(stage.logdet))
                mu, L, won = stage.mu[b : b + 1], stage.L[b : b + 1], [won[stage.survivors[b]]]
        # On all rows: two C-steps for each candidate, then the best one to convergence.
        best: _FullState | None = None
        winner = won[0]
        steps = 2 if mu.shape[0] > 1 else _MAX_CSTEPS
        for b in range(mu.shape[0]):
            state = self._converge_full(mu[b], L[b], steps)
            if state is not None and (best is None or state.logdet < best.logdet):
                best, winner = state, won[b]
        if best is not None and not best.converged:
            more = self._converge_full(best.location, best.cholesky, _MAX_CSTEPS)
            if more is not None and more.logdet <= best.logdet:
                best = more
        if best is None:  # every candidate turned singular on all rows: classical start
            mu0, L0 = self._fallback_start(np.arange(n))
            best, winner = self._converge_full(mu0[0], L0[0], _MAX_CSTEPS), _CLASSICAL_START
            if best is None:  # pragma: no cover - an exact fit is raised before this
                raise DataError("the MCD search found no nonsingular h-subset; the data are degenerate.")
        return _Outcome(best.support, best.distances, best.location, "subsample, then all rows", winner, n_random)

    def _random_candidates(
        self, rows: npt.NDArray[np.intp], h_local: int, n_random: int
    ) -> tuple[FloatMatrix, npt.NDArray[np.float64]]:
        """The best of ``n_random`` random starts after their first two C-steps.

        The first two C-steps run in groups of about 300 rows, FAST-MCD's group size
        (Rousseeuw & Van Driessen 1999, Section 3). On up to 600 rows there is one group (all
        rows, or a random 300 of them) and its best ``_COMBINED_KEEP`` are returned; on more,
        the rows are split into groups as in FAST-MCD's nested scheme, each group gets its
        share of the starts, and the best ``_GROUP_KEEP`` of each group are returned.
        """
        m = rows.size
        if m <= _NESTED_ABOVE:
            one = rows if m <= _GROUP_ROWS else np.sort(self.rng.choice(rows, size=_GROUP_ROWS, replace=False))
            groups, per_group, keep = [one], n_random, _COMBINED_KEEP
        else:
            groups = np.array_split(self.rng.permutation(rows), max(1, min(_MAX_GROUPS, m // _GROUP_ROWS)))
            per_group, keep = max(1, -(-n_random // len(groups))), _GROUP_KEEP
        pool_mu, pool_L = [np.empty((0, self.p))], [np.empty((0, self.p, self.p))]
        for g in groups:
            h_g = h_local if g.size == m else self._local_h(g.size)
            mu, L = self.starts(g, h_g, per_group)
            mu, L, ld, idx = self.csteps(g, h_g, mu, L, 2)
            mu, L, _, _ = self.best(mu, L, ld, idx, keep)
            pool_mu.append(mu)
            pool_L.append(L)
        return np.concatenate(pool_mu), np.concatenate(pool_L)

    def _local_h(self, rows: int) -> int:
        """Subset size on a random part of the data: ceil(rows * h / n), at least p + 1."""
        return int(min(rows, max(self.p + 1, math.ceil(rows * self.h / self.n))))

    def _fallback_start(self, rows: npt.NDArray[np.intp]) -> tuple[FloatMatrix, npt.NDArray[np.float64]]:
        """Classical mean and covariance of ``X[rows]`` when every random start was singular."""
        mu, S = _batch_moments(self.X, rows[None, :])
        L, _, singular = _batch_cholesky(S, self.scale, self.floor)
        if singular[0]:
            self.plane_checks = 0
            self.check_plane(rows, mu[0], S[0])
            mu, S = _batch_moments(self.X, np.arange(self.n)[None, :])
            L, _, singular = _batch_cholesky(S, self.scale, self.floor)
            if singular[0]:
                self.plane_checks = 0
                self.checked.clear()
                self.check_plane(np.arange(self.n), mu[0], S[0])
        return mu, L

    def _finish_small(
        self, rows: npt.NDArray[np.intp], mu: FloatMatrix, L: Any, ld: FloatVector, idx: Any
    ) -> BoolVector:
        if mu.shape[0] == 0:
            mu0, L0 = self._fallback_start(np.arange(self.n))
            mu, _, ld, idx = self.csteps(np.arange(self.n), self.h, mu0, L0, _MAX_CSTEPS)
            rows = np.arange(self.n)
            if mu.shape[0] == 0:  # pragma: no cover - an exact fit is raised before this
                raise DataError("the MCD search found no nonsingular h-subset; the data are degenerate.")
        b = int(np.argmin(ld))
        support = np.zeros(self.n, dtype=bool)
        support[rows[idx[b]]] = True
        return support

    def _full_stage(self, mu: FloatMatrix, L: npt.NDArray[np.float64]) -> _FullState:
        """C-steps on all rows: two for each candidate, then the best one to convergence.

        Returns the final state: subset, mean, Cholesky factor and, when at hand, the
        distances of all rows from that mean and covariance (saving one pass over the data).
        """
        best: _FullState | None = None
        # Every candidate is iterated to convergence when C-steps on all rows are cheap;
        # otherwise each gets two C-steps and only the best goes on.
        cheap = float(self.n) * self.p * self.p <= _CONVERGE_ALL_WORK
        steps = _MAX_CSTEPS if cheap or mu.shape[0] == 1 else 2
        for b in range(mu.shape[0]):
            state = self._converge_full(mu[b], L[b], steps)
            if state is not None and (best is None or state.logdet < best.logdet):
                best = state
        if best is None:
            mu0, L0 = self._fallback_start(np.arange(self.n))
            best = self._converge_full(mu0[0], L0[0], _MAX_CSTEPS)
            if best is None:  # pragma: no cover - an exact fit is raised before this
                raise DataError("the MCD search found no nonsingular h-subset; the data are degenerate.")
        if not best.converged:
            more = self._converge_full(best.location, best.cholesky, _MAX_CSTEPS)
            if more is not None and more.logdet <= best.logdet:
                best = more
        return best

    def _converge_full(self, loc: FloatVector, Lc: FloatMatrix, max_steps: int) -> _FullState | None:
        """Up to ``max_steps`` C-steps on all rows from one (mean, Cholesky factor).

        None if the first subset is singular (after checking it for an exact fit). The
        scatter matrix of the subset is kept about a fixed shift and updated with the rows that
        enter and leave, so a C-step that swaps few rows costs about one distance pass.
        """
        X, h = self.X, self.h
        shift = loc.copy()
        support: BoolVector | None = None
        total = np.zeros(self.p)
        scatter = np.zeros((self.p, self.p))
        logdet = np.inf
        for _ in range(max_steps):
            d = sq_distances_cholesky(X, loc, Lc)
            new = _smallest(d, h)
            if support is not None and np.array_equal(new, support):
                return _FullState(logdet, support, loc, Lc, d, True)
            if support is None or 4 * int(np.count_nonzero(new & ~support)) > h:
                total, scatter = _masked_sums(X, new, shift)
            else:
                entering = X[new & ~support] - shift
                leaving = X[support & ~new] - shift
                total = total + entering.sum(axis=0) - leaving.sum(axis=0)
                scatter = scatter + entering.T @ entering - leaving.T @ leaving
            delta = total / h
            S_new = scatter / h - np.outer(delta, delta)
            S_new = (S_new + S_new.T) / 2.0
            L_new, ld_new, singular = _batch_cholesky(S_new[None], self.scale, self.floor)
            if singular[0]:
                self.plane_checks = 0
                self.checked.clear()
                self.check_plane(np.flatnonzero(new), shift + delta, S_new)
                return None if support is None else _FullState(logdet, support, loc, Lc, d, True)
            if support is not None and float(ld_new[0]) >= logdet - _FULL_LOGDET_TOL:
                # Converged: the step would lower log det by less than the tolerance. Keep
                # the current subset, whose distances are at hand (saves a pass over the data).
                return _FullState(logdet, support, loc, Lc, d, True)
            support, loc, Lc, logdet = new, shift + delta, L_new[0], float(ld_new[0])
        assert support is not None
        return _FullState(logdet, support, loc, Lc, None, False)


@dataclass(frozen=True)
class _FullState:
    """Where the C-steps on all rows stopped: log det, subset, its mean and Cholesky factor,
    the distances from them (None if not computed) and whether the iteration converged."""

    logdet: float
    support: BoolVector
    location: FloatVector
    cholesky: FloatMatrix
    distances: FloatVector | None
    converged: bool


# ----------------------------------------------------------------------------------------
# assembling the result


def _fit(
    X: FloatMatrix,
    h: int,
    rng: np.random.Generator,
    n_starts: int,
    finite_sample_alpha: float | None,
    quantile: float,
    method: str = "auto",
) -> dict[str, Any]:
    n, p = X.shape
    search = _Search(X, h, rng, n_starts)
    try:
        if method == "random":
            support, d_unc, near_mean, scheme = search.run()
            outcome = _Outcome(support, d_unc, near_mean, scheme, _RANDOM_START, n_starts)
        else:
            outcome = search.run_combined(n_starts)
    except _ExactFitFound as found:
        on = _smallest_exact_fit(X, search.scale, found.on_plane, h, rng, n_starts or _AUTO_RANDOM_STARTS)
        fit = _exact_fit_result(X, search.scale, on, quantile, _scheme_of(n))
        fit["best_start"] = "exact fit: rows on a hyperplane"
        fit["n_starts"] = search.n_starts
        return fit
    support, d_unc, near_mean = outcome.support, outcome.distances, outcome.near_mean

    # Sums about a point near the mean keep the one-pass moments accurate.
    shift = near_mean if near_mean is not None else _masked_mean(X, support)
    raw_loc, S_raw = _masked_moments(X, support, shift)
    L_raw, ld_raw, _ = _batch_cholesky(S_raw[None], search.scale, search.floor)
    raw_log_det = float(ld_raw[0])
    if d_unc is None:
        d_unc = sq_distances_cholesky(X, raw_loc, L_raw[0])

    corrections: list[str] = []
    c_raw = mcd_consistency_factor(h / n, p)
    corrections.append(f"raw: consistency factor c(h/n) = {c_raw:.6g} (Croux & Haesbroeck 1999)")
    f_raw = 1.0
    if finite_sample_alpha is not None:
        f_raw = _finite_sample_factor("raw", p, n, finite_sample_alpha)
        corrections.append(_finite_sample_note("raw", f_raw))
    raw_scale = c_raw * f_raw
    raw_cov = S_raw * raw_scale
    raw_d = d_unc / raw_scale

    keep_limit = _chi2_ppf(_REWEIGHT_QUANTILE, p)
    kept = raw_d <= keep_limit
    n_kept = int(kept.sum())
    loc, S_rw = _masked_moments(X, kept, raw_loc)
    L_rw, _, singular = _batch_cholesky(S_rw[None], search.scale, search.floor)
    if singular[0] or n_kept <= p:
        loc, S_rw, L_rw = raw_loc, S_raw, L_raw
        c_rw, f_rw = c_raw, f_raw
        corrections.append("reweighting skipped: the kept rows have a singular covariance; raw estimate used")
        d_rw_unc = d_unc
    else:
        c_rw = mcd_consistency_factor(n_kept / n, p)
        corrections.append(
            f"reweighted: consistency factor c({n_kept}/{n}) = {c_rw:.6g} for the fraction of rows kept "
            "(Croux & Haesbroeck 1999)"
        )
        f_rw = 1.0
        if finite_sample_alpha is not None:
            f_rw = _finite_sample_factor("reweighted", p, n, finite_sample_alpha)
            corrections.append(_finite_sample_note("reweighted", f_rw))
        d_rw_unc = sq_distances_cholesky(X, loc, L_rw[0])
    rw_scale = c_rw * f_rw
    cutoff = _chi2_ppf(quantile, p)
    distances = d_rw_unc / rw_scale
    return {
        "raw_location": raw_loc,
        "raw_covariance": raw_cov,
        "support": support,
        "raw_subset": support.copy(),
        "location": loc,
        "covariance": S_rw * rw_scale,
        "distances": distances,
        "outliers": distances > cutoff,
        "raw_distances": raw_d,
        "reweighted": kept,
        "p_used": p,
        "raw_log_determinant": raw_log_det,
        "cutoff": cutoff,
        "raw_consistency_factor": c_raw,
        "reweighted_consistency_factor": c_rw,
        "raw_correction_factor": f_raw,
        "reweighted_correction_factor": f_rw,
        "corrections": tuple(corrections),
        "n_reweighted": n_kept,
        "search": outcome.scheme,
        "best_start": outcome.winner,
        "n_starts": outcome.n_random,
        "exact_fit": False,
        "hyperplane_normal": None,
        "hyperplane_offset": None,
        "n_on_hyperplane": 0,
    }


#: Per-row arrays of a fit, put back into the input row order by :func:`_unpermute`.
_ROW_FIELDS = ("support", "raw_subset", "distances", "outliers", "raw_distances", "reweighted")


def _canonical_order(X: FloatMatrix) -> npt.NDArray[np.intp]:
    """Row order that depends only on the rows' values: lexicographic, first column first.

    The search runs on the rows in this order, so its random draws, and hence the result,
    do not depend on the order of the input rows (identical rows are interchangeable).
    Sorting by the first column suffices unless it has ties.
    """
    first = X[:, 0] + 0.0  # + 0.0 turns -0.0 into 0.0
    order = np.argsort(first, kind="stable")
    if np.any(first[order[1:]] == first[order[:-1]]):
        order = np.lexsort(tuple(X[:, j] + 0.0 for j in range(X.shape[1] - 1, -1, -1)))
    return order.astype(np.intp)


def _unpermute(fit: dict[str, Any], order: npt.NDArray[np.intp]) -> dict[str, Any]:
    """Put the per-row arrays of a fit on rows ``X[order]`` back into the order of X."""
    out = dict(fit)
    for key in _ROW_FIELDS:
        back = np.empty_like(fit[key])
        back[order] = fit[key]
        out[key] = back
    return out


def _scheme_of(n: int) -> str:
    return "all rows" if n <= _NESTED_ABOVE else "nested subsets"


def _smallest_exact_fit(
    X: FloatMatrix, scale: FloatVector, on: BoolVector, h: int, rng: np.random.Generator, n_starts: int
) -> BoolVector:
    """Rows of the smallest affine subspace holding at least h rows, starting from a hyperplane.

    The rows on the hyperplane are expressed in coordinates of the hyperplane and searched
    again (FAST-MCD in one dimension less); if at least h of them lie on a smaller subspace
    (e.g. many repeated rows), that one is kept, and so on.
    """
    for _ in range(X.shape[1]):
        rows = np.flatnonzero(on)
        Z = (X[rows] - X[rows].mean(axis=0)) / scale
        lam, V = np.linalg.eigh(Z.T @ Z / rows.size)
        varying = lam > _NULL_EIGENVALUE * max(float(lam[-1]), 0.0)
        if not varying.any() or rows.size <= int(varying.sum()):
            break
        try:
            _Search(Z @ V[:, varying], h, rng, n_starts).run()
        except _ExactFitFound as inner:
            on = np.zeros_like(on)
            on[rows[inner.on_plane]] = True
            continue
        break
    return on


def _exact_fit_result(
    X: FloatMatrix, scale: FloatVector, on: BoolVector, quantile: float, scheme: str
) -> dict[str, Any]:
    """Estimates and finite distances when at least h rows lie on a hyperplane (see mcd Notes)."""
    n = X.shape[0]
    n_on = int(on.sum())
    loc, S = _masked_moments(X, on, _masked_mean(X, on))
    Ss = S / scale[:, None] / scale[None, :]
    lam, V = np.linalg.eigh((Ss + Ss.T) / 2.0)
    top = max(float(lam[-1]), 0.0)
    null = lam <= _NULL_EIGENVALUE * top
    null[0] = True
    rank = int((~null).sum())
    within = np.zeros(n)
    resid = np.zeros(n)
    for a in range(0, n, _ROW_BLOCK):
        Z = ((X[a : a + _ROW_BLOCK] - loc) / scale) @ V
        if rank:
            within[a : a + _ROW_BLOCK] = (Z[:, ~null] ** 2 / lam[~null]).sum(axis=1)
        resid[a : a + _ROW_BLOCK] = np.sqrt((Z[:, null] ** 2).sum(axis=1))
    tol = max(float(resid[on].max()) * (1.0 + 1e-9), _ON_PLANE * math.sqrt(top), 1e-12)
    cutoff = float(sp_stats.chi2.ppf(quantile, max(rank, 1)))
    with np.errstate(over="ignore"):
        off_term = cutoff * (1.0 + np.minimum((resid / tol) ** 2, 1e250))
    distances = np.where(on, within, within + off_term)
    normal = V[:, 0] / scale
    normal /= np.linalg.norm(normal)
    big = np.argmax(np.abs(normal))
    if normal[big] < 0:
        normal = -normal
    offset = float(normal @ loc)
    ld = float("-inf")
    note = (
        f"exact fit: {n_on} rows lie on a hyperplane; mean and covariance of those rows, "
        "no consistency factor; off-plane rows get the exact-fit distance convention"
    )
    return {
        "raw_location": loc,
        "raw_covariance": S,
        "support": on.copy(),
        "raw_subset": on.copy(),
        "location": loc.copy(),
        "covariance": S.copy(),
        "distances": distances,
        "outliers": distances > cutoff,
        "raw_distances": distances.copy(),
        "reweighted": on.copy(),
        "p_used": rank,
        "raw_log_determinant": ld,
        "cutoff": cutoff,
        "raw_consistency_factor": 1.0,
        "reweighted_consistency_factor": 1.0,
        "raw_correction_factor": 1.0,
        "reweighted_correction_factor": 1.0,
        "corrections": (note,),
        "n_reweighted": n_on,
        "search": scheme,
        "exact_fit": True,
        "hyperplane_normal": normal,
        "hyperplane_offset": offset,
        "n_on_hyperplane": n_on,
    }


def _binary_exponents(X: FloatMatrix) -> npt.NDArray[np.intp]:
    """Power-of-two exponents that bring columns of extreme magnitude near 1 (0 for the rest).

    Columns whose largest absolute value is outside [2^-256, 2^256] would underflow or
    overflow when squared and summed; dividing them by 2^e is exact, so the search runs on the
    rescaled columns and :func:`_rescale` converts the result back.
    """
    magnitude = np.abs(X).max(axis=0)
    extreme = (magnitude < 2.0**-256) | (magnitude > 2.0**256)
    return np.where(extreme, np.frexp(magnitude)[1], 0).astype(np.intp)


def _rescale(fit: dict[str, Any], power: npt.NDArray[np.intp]) -> dict[str, Any]:
    """Undo :func:`_binary_exponents` on the estimates (distances are unit-free)."""
    out = dict(fit)
    with np.errstate(over="ignore", under="ignore"):
        for key in ("raw_location", "location"):
            out[key] = np.ldexp(fit[key], power)
        for key in ("raw_covariance", "covariance"):
            out[key] = np.ldexp(fit[key], power[:, None] + power[None, :])
        out["raw_log_determinant"] = fit["raw_log_determinant"] + 2.0 * math.log(2.0) * float(power.sum())
        if fit["hyperplane_normal"] is not None:
            # w_j = v_j 2^-power_j, formed in mantissa/exponent pairs so nothing over- or
            # underflows; components at rounding level (1e-12 of the largest) are exact zeros.
            v = np.asarray(fit["hyperplane_normal"], dtype=np.float64)
            v = np.where(np.abs(v) > 1e-12 * np.max(np.abs(v)), v, 0.0)
            mantissa, exponent = np.frexp(v)
            exponent = exponent - power
            nonzero = v != 0
            w = np.where(nonzero, np.ldexp(mantissa, exponent - exponent[nonzero].max()), 0.0)
            w /= np.linalg.norm(w)
            out["hyperplane_normal"] = w
            out["hyperplane_offset"] = float(w @ out["raw_location"])
    note = (
        "columns of extreme magnitude were divided by powers of two for the search (exact); "
        "covariance entries beyond the float64 range are 0 or inf"
    )
    out["corrections"] = (*fit["corrections"], note)
    return out


def _embed(
    fit: dict[str, Any], data: FloatMatrix, varying: npt.NDArray[np.intp], constant: BoolVector
) -> dict[str, Any]:
    """Put a fit on the non-constant columns back into all p columns."""
    n, p = data.shape
    out = dict(fit)
    for key in ("raw_location", "location"):
        full = data[0].copy()
        full[varying] = fit[key]
        out[key] = full
    for key in ("raw_covariance", "covariance"):
        full = np.zeros((p, p))
        full[np.ix_(varying, varying)] = fit[key]
        out[key] = full
    if fit["exact_fit"]:
        normal = np.zeros(p)
        normal[varying] = fit["hyperplane_normal"]
        out["hyperplane_normal"] = normal
    else:
        j = int(np.flatnonzero(constant)[0])
        out["support"] = np.ones(n, dtype=bool)
        normal = np.zeros(p)
        normal[j] = 1.0
        out["hyperplane_normal"] = normal
        out["hyperplane_offset"] = float(data[0, j])
        out["n_on_hyperplane"] = n
        out["raw_log_determinant"] = float("-inf")
        out["exact_fit"] = True
    note = (
        f"constant columns set aside: the fit uses {varying.size} of {p} columns; "
        "their covariance rows and columns are zero"
    )
    out["corrections"] = (*fit["corrections"], note)
    return out


def _all_rows_identical(data: FloatMatrix, common: dict[str, Any]) -> MCDResult:
    n, p = data.shape
    zeros = np.zeros(n)
    normal = np.zeros(p)
    normal[0] = 1.0
    everyone = np.ones(n, dtype=bool)
    cutoff = float(sp_stats.chi2.ppf(common["cutoff_quantile"], 1))
    return MCDResult(
        raw_location=data[0].copy(),
        raw_covariance=np.zeros((p, p)),
        support=everyone,
        raw_subset=everyone.copy(),
        location=data[0].copy(),
        covariance=np.zeros((p, p)),
        distances=zeros,
        outliers=np.zeros(n, dtype=bool),
        raw_distances=zeros.copy(),
        reweighted=everyone.copy(),
        n=n,
        p=p,
        p_used=0,
        raw_log_determinant=float("-inf"),
        cutoff=cutoff,
        raw_consistency_factor=1.0,
        reweighted_consistency_factor=1.0,
        raw_correction_factor=1.0,
        reweighted_correction_factor=1.0,
        corrections=("all rows are identical: location is that row, covariance zero, distances zero",),
        n_reweighted=n,
        search="none (all rows identical)",
        best_start="none (all rows identical)",
        n_starts=0,
        exact_fit=True,
        hyperplane_normal=normal,
        hyperplane_offset=float(data[0, 0]),
        n_on_hyperplane=n,
        **common,
    )


# ----------------------------------------------------------------------------------------
# finite-sample factors (Pison, Van Aelst & Willems 2002), checked against robustbase 0.95.0
# (tests/test_mcd_robustbase.py); where robustbase uses its simulated table instead, see mcd Notes

#: p = 1 and p = 2: f(n) = 1 - exp(g0) / n^g1 at a = 0.5 and a = 0.875, (g0, g1).
_PISON_SMALL_P = {
    ("raw", 1): ((0.262024211897096, 0.604756680630497), (-0.351584646688712, 1.01646567502486)),
    ("raw", 2): ((0.673292623522027, 0.691365864961895), (0.446537815635445, 1.06690782995919)),
    ("reweighted", 1): ((1.11098143415027, 1.5182890270453), (-0.66046776772861, 0.88939595831888)),
    ("reweighted", 2): ((3.11101712909049, 1.91401056721863), (0.79473550581058, 1.10081930350091)),
}
#: p > 2: f(q p^2) = 1 + gamma_q / p^delta_q for q = 2, 3, at a = 0.5 and a = 0.875.
_PISON_LARGE_P = {
    "raw": (
        ((-1.42764571687802, 1.26263336932151), (-1.06141115981725, 1.28907991440387)),
        ((-0.455179464070565, 1.11192541278794), (-0.294241208320834, 1.09649329149811)),
    ),
    "reweighted": (
        ((-1.02842572724793, 1.67659883081926), (-0.26800273450853, 1.35968562893582)),
        ((-0.544482443573914, 1.25994483222292), (-0.343791072183285, 1.25159004257133)),
    ),
}


def _pison_f(stage: str, p: int, n: int, level: int) -> float:
    """f(p, n) at a = 0.5 (level 0) or a = 0.875 (level 1)."""
    if p <= 2:
        g0, g1 = _PISON_SMALL_P[(stage, p)][level]
        return 1.0 - math.exp(g0) / math.pow(n, g1)
    (gam2, del2), (gam3, del3) = _PISON_LARGE_P[stage][level]
    # log(1 - f) is linear in log n through the two points n = 2 p^2 and n = 3 p^2.
    y2, y3 = math.log(-gam2 / p**del2), math.log(-gam3 / p**del3)
    x2, x3 = math.log(2.0 * p * p), math.log(3.0 * p * p)
    slope = (y3 - y2) / (x3 - x2)
    return 1.0 - math.exp(y2 + slope * (math.log(n) - x2))


def _finite_sample_factor(stage: str, p: int, n: int, alpha: float) -> float:
    f_half, f_high = _pison_f(stage, p, n, 0), _pison_f(stage, p, n, 1)
    if alpha <= 0.875:
        f = f_half + (f_high - f_half) * (alpha - 0.5) / 0.375
    else:
        f = f_high + (1.0 - f_high) * (alpha - 0.875) / 0.125
    if not f > 0.0:
        return 1.0
    return 1.0 / f


def _finite_sample_note(stage: str, factor: float) -> str:
    if factor == 1.0:
        return f"{stage}: finite-sample factor not applied (n too small for the approximation)"
    return f"{stage}: finite-sample factor {factor:.6g} (Pison, Van Aelst & Willems 2002; as robustbase's covMcd)"
