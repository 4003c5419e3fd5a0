"""Complete and quasi-complete separation of the classes: an overlap certificate, else linear programming."""

from __future__ import annotations

from collections.abc import Callable, Iterator
from dataclasses import dataclass, field
from typing import Any, cast

import numpy as np
import numpy.typing as npt
from scipy import linalg, sparse
from scipy.optimize import linprog
from scipy.special import expit

from discaudit.errors import DataError
from discaudit.stats._inputs import FloatMatrix, as_labels, as_matrix
from discaudit.stats._sampling import resolve_seed
from discaudit.stats.blocks import ROW_BLOCK
from discaudit.stats.moments import ClassMoments

__all__ = ["SeparationComparison", "SeparationResult", "detect_separation"]

#: Relative singular-value threshold for the span of the boundary rows of a working set.
_SPAN_TOL = 1e-9
#: Relative projection residual above which a row is outside that span.
_MEMBER_TOL = 1e-6
#: |a_i' beta| below this times ||beta|| max_i ||a_i|| counts as zero (neither strict nor violated).
_VALUE_TOL = 1e-9
#: Coefficients of the standardized direction smaller than this are reported as zero.
_ZERO_COEF = 1e-9
#: Boxes on the direction (standardized units), tried in turn when HiGHS fails a strict-set program.
_BETA_BOXES = (1e6, 1e3)
#: Eigenvalue ratio of the standardized cross-product matrix above which all features are
#: linearly independent without a QR (see _independent_columns).
_GRAM_SCREEN = 1e-8
#: Newton steps of the overlap certificate (see _certificate). On overlapping Gaussian
#: classes it holds within 2 to 5 steps, on nearly separated ones within about 9; separated data
#: never let it hold, and after this many steps the linear program decides.
_CERTIFICATE_STEPS = 12
#: Newton steps of the separation certificate (same iterates; design choice): on scikit-learn's
#: breast cancer data the separated working sets of 505 and 506 rows needed 13, about half this.
_SEPARATION_STEPS = 25
#: Smallest singular-value ratio of the working set at which the certificate is tried: well
#: above rounding, so that the computed smallest singular value is a reliable bound.
_CERTIFICATE_RANK = 1e-6
#: Unit roundoff of float64.
_UNIT_ROUNDOFF = float(np.finfo(np.float64).eps) / 2

IntArray = npt.NDArray[np.intp]


@dataclass(frozen=True)
class SeparationComparison:
    """Separation of one class from the others (one comparison).

    Attributes
    ----------
    label : object
        The class on the positive side of the hyperplane.
    versus : tuple
        The classes on the other side (one class when K = 2, all the others when K > 2).
    kind : str
        ``"complete"``, ``"quasi_complete"`` or ``"none"``.
    direction : dict[str, float] or None
        Normal vector of a separating hyperplane over the standardized features (each feature
        centred and divided by its standard deviation, divisor n), scaled to unit Euclidean
        length, keyed by feature name. Found by minimizing its L1 norm, so it tends to involve
        few features. None when ``kind == "none"``.
    coefficients : dict[str, float] or None
        The same hyperplane in the original units: sum_j coefficients[j] * x_j + intercept is
        positive on the strictly separated rows of ``label``, negative on those of ``versus``
        and zero on the boundary rows.
    intercept : float or None
        Intercept of that hyperplane in the original units.
    margin : float or None
        Smallest distance, in standardized units, from a strictly separated row to the
        reported hyperplane (it is not maximized over hyperplanes).
    separating_features : tuple[str, ...]
        Features with a nonzero entry in ``direction``, largest absolute entry first.
    boundary_rows : tuple[int, ...]
        For quasi-complete separation, the integer positions (0-based, in the input) of the
        rows that lie on every separating hyperplane; empty otherwise.
    n_used : int
        Rows in the final working set of the detection linear program (see Notes of
        :func:`detect_separation`); the conclusion holds for all rows either way.
    subsampled : bool
        True when ``n_used`` is smaller than the number of rows, i.e. the linear programs ran
        on a seeded random subsample (grown where needed) and the other rows were certified
        by the checks described in the Notes of :func:`detect_separation`.
    """

    label: Any
    versus: tuple[Any, ...]
    kind: str
    direction: dict[str, float] | None
    coefficients: dict[str, float] | None
    intercept: float | None
    margin: float | None
    separating_features: tuple[str, ...]
    boundary_rows: tuple[int, ...]
    n_used: int
    subsampled: bool

    @property
    def n_boundary(self) -> int:
        """Number of boundary rows."""
        return len(self.boundary_rows)


@dataclass(frozen=True)
class SeparationResult:
    """Outcome of :func:`detect_separation`.

    Attributes
    ----------
    comparisons : tuple[SeparationComparison, ...]
        One entry for K = 2 (the second class against the first, classes in sorted order),
        else one per class against all the others.
    any_complete : bool
        True if some comparison is completely separated.
    any_quasi_complete : bool
        True if some comparison is quasi-completely separated.
    classes : tuple
        Class labels in code order.
    feature_names : tuple[str, ...]
        Feature names in column order.
    n_total : int
        Rows passed in.
    random_state : int or None
        Seed of the subsamples, or None when no comparison needed one.
    max_rows : int
        The subsampling threshold that was in force.
    notes : tuple[str, ...]
        Remarks on the input that affected the computation (e.g. constant features ignored).
    """

    comparisons: tuple[SeparationComparison, ...]
    any_complete: bool
    any_quasi_complete: bool
    classes: tuple[Any, ...]
    feature_names: tuple[str, ...]
    n_total: int
    random_state: int | None
    max_rows: int
    notes: tuple[str, ...] = field(default=())

    @property
    def any_separation(self) -> bool:
        """True if some comparison is completely or quasi-completely separated."""
        return self.any_complete or self.any_quasi_complete


def detect_separation(
    X: Any,
    y: Any,
    *,
    max_rows: int = 2000,
    random_state: int | None = None,
    certify_overlap: bool = True,
    certify_separation: bool = True,
    moments: ClassMoments | None = None,
) -> SeparationResult:
    """Detect complete and quasi-complete separation of the classes by linear programming.

    Under complete or quasi-complete separation the maximum likelihood estimate of a logistic
    regression does not exist (coefficients diverge); discriminant analysis is unaffected.

    Parameters
    ----------
    X : array-like or DataFrame, shape (n, p)
        Numeric features. DataFrame column names are used in the result.
    y : array-like, shape (n,)
        Class labels, at least two distinct values.
    max_rows : int, default 2000
        Comparisons with more rows start from a seeded, class-stratified random subsample of
        ``max_rows`` rows, grown only as far as needed to certify the answer for all rows;
        see Notes.
    random_state : int or None, default None
        Seed of the subsamples. If None and a subsample is needed, a fresh seed is drawn and
        recorded in the result.
    certify_overlap : bool, default True
        Try the overlap certificate (Notes) before the first linear program of each comparison.
        It only ever skips a program whose answer it has proven, so the result is the same
        either way; False runs the programs always (for checking and timing).
    certify_separation : bool, default True
        Try the separation certificate (Notes) in place of each detection program. The kind, the
        boundary rows and the reported hyperplane (from the direction program either way) are
        the same; ``n_used`` can differ, the working set growing by other rows.
    moments : ClassMoments, optional
        Per-class moments of exactly these rows, one class per class of ``y`` in code order (e.g.
        the ones an audit computed once): the standardization and the constant-feature screen then
        come from them, without a pass over the rows. Computed here by default.

    Returns
    -------
    SeparationResult
        ``comparisons`` (one :class:`SeparationComparison` each, with ``label``, ``versus``,
        ``kind``, ``direction``, ``coefficients``, ``intercept``, ``margin``,
        ``separating_features``, ``boundary_rows``, ``n_used``, ``subsampled``),
        ``any_complete``, ``any_quasi_complete``, ``classes``, ``feature_names``, ``n_total``,
        ``random_state``, ``max_rows``, ``notes``.

    Raises
    ------
    DataError
        If ``X`` is not finite numeric data, ``y`` does not match it or has fewer than two
        classes, ``max_rows`` is not an integer of at least 2, or ``moments`` do not count the
        rows of each class; also if the LP solver fails.

    See Also
    --------
    discaudit.stats.mardia.mardia : shape of the class distributions, the other input to the
        choice between discriminant analysis and logistic regression.

    Notes
    -----
    Write s_i = +1 for rows of ``label`` and -1 otherwise, and a_i = s_i (x_i, 1) with x_i the
    standardized features. Following Albert and Anderson (1984), the classes are

    * completely separated if some beta = (w, b) gives a_i' beta > 0 for every row;
    * quasi-completely separated if not, but some beta gives a_i' beta >= 0 for every row with
      strict inequality for at least one row (the rows with equality lie on the hyperplane);
    * overlapping ("none") otherwise; then the logistic MLE exists (given full column rank).

    The set C = {beta : a_i' beta >= 0 for all i} is a convex cone, so the rows that are strict
    for *some* member of C are strict simultaneously for one member. The linear program

        maximize sum_i t_i  subject to  a_i' beta >= t_i,  0 <= t_i <= 1,  beta free

    therefore has optimum t_i = 1 exactly on that maximal set P and t_i = 0 elsewhere (any
    feasible beta lies in C and a member of C can be scaled up). P = all rows means complete,
    P empty means none, anything else quasi-complete with boundary rows = the complement of P:
    those rows lie on every separating hyperplane. Rows with t_i > 1/2 are taken as in P.
    Exact collinearity among the features, which makes a_i' beta = 0 for every row for some
    beta != 0, is not separation and is not reported as such (only strict rows count).
    Constant features are dropped, and so are features that are linear combinations of others
    (pivoted QR of the standardized features, first pivot the first feature, rank at 1e-9 of
    the first pivot); ``notes`` names both.

    The reported hyperplane solves a second LP: minimize ||w||_1 subject to a_i' beta >= 1 on
    P and a_i' beta = 0 on the boundary rows (any separating beta vanishes there), over the
    standardized features; ``direction`` is w / ||w||_2 and ``margin`` is the smallest
    a_i' beta / ||w||_2 on P. Minimizing the L1 norm keeps the direction sparse, so
    ``separating_features`` names few features when few suffice.

    Overlap certificate, before any LP. By Stiemke's theorem of the alternative [2]_, either some
    beta has A beta >= 0 with A beta != 0, or some lambda with every lambda_i > 0 has
    A' lambda = sum_i lambda_i a_i = 0, never both. Such a lambda says that the two sides carry
    equal total weight and that sum_P lambda_i z_i / sum_P lambda_i = sum_N lambda_i z_i /
    sum_N lambda_i: one point is a convex combination, with every weight positive, of the rows
    of either side, i.e. the relative interiors of the two convex hulls meet. It therefore
    proves both "not completely separated" and "not quasi-completely separated" (the overlap
    of Albert and Anderson 1984); by Gordan's theorem a lambda >= 0, lambda != 0 would prove
    only the first, so it is not used. Before each detection LP of a comparison the certificate
    is sought on the working set W of that round (all rows, the starting subsample, or the set
    grown as described below): if it is found and the rows of W have full column rank, every
    beta with A_W beta >= 0 is 0, the cone of all rows lies in that of W, and the comparison is
    "none" with ``n_used`` = |W| -- the answer, and the ``n_used``, that the LP and the checks
    after it would have given. It is never used to claim separation: when it is not found, the
    LPs decide as below.

    The lambda comes from Newton's method for the logistic regression of the two sides on W
    (Santner and Duffy 1986 [3]_ decide the three cases by linear programming, as the LPs
    below do; the likelihood gives the cheaper proof of overlap): its maximum likelihood
    estimate beta_hat exists exactly under overlap, and its score equations
    sum_i sigma(-a_i' beta_hat) a_i = 0 are such a lambda, lambda_i = sigma(-a_i' beta_hat) in
    (0, 1). At each iterate beta, with lambda_i = sigma(-a_i' beta), w_i = lambda_i (1 -
    lambda_i) and the Newton step delta = (A' diag(w) A)^-1 A' lambda, the linearized weights
    mu = lambda - w * (A delta) satisfy A' mu = 0 exactly in exact arithmetic; the certificate
    is the first mu > 0 (at most 12 steps; overlapping classes need 2 to 9). At beta = 0, mu_i = (1 - s_i yhat_i) / 2 with yhat
    the least-squares fit of the +-1 labels on (z, 1) (Fisher's direction): the first candidate
    holds when no fitted value goes beyond its own row's label. Rounding is bounded, not
    ignored: with r the computed A' mu, gamma = m u / (1 - m u) (u the unit roundoff, m = |W|)
    and sigma_min the smallest singular value of A_W, the exact vector mu - A (A'A)^-1 A' mu is
    orthogonal to the columns and differs from mu by at most (||r|| + gamma sum_i |mu_i|
    ||a_i||) / sigma_min in every entry; it is accepted only when that is at most half of
    min_i mu_i (and sigma_min is at least 1e-6 times the largest singular value). On the
    benchmark's overlapping Gaussian classes (n 500 to 10,000, p 5 to 30) it decided every
    comparison, about 0.3 ms each against 7 to 25 ms for an LP, and cut the time of this
    function by 84 to 98 %; with the class means moved 3 or 6 times as far apart (many
    comparisons separated, or their subsample is) it decides fewer, and the separation
    certificate below takes over: both together cut the time by 18 to 72 % there
    (benchmarks/bench_separation.py, two seeds per case).

    Separation certificate, in the same Newton steps. Under separation the iterates grow along
    a separating direction; the first iterate beta with a_i' beta above the zero tolerance below
    on every row of W makes every row of W strict, the answer the detection LP would give on W,
    and stands in for it (the rows outside W are then checked as after an LP). The first iterate
    is twice the least-squares fit of the labels. On scikit-learn's iris, wine and breast cancer
    data, whose separated comparisons are all complete, it proved each of them, which left the
    direction LP as the only program.

    Large data: the LPs run on a working set W of rows and the answer is certified for all
    rows. W starts as all rows if there are at most ``max_rows``, else as a seeded subsample
    stratified by side (up to ``max_rows // 2`` rows from each side, more from one side if the
    other is small). After solving on W, with beta the solution:

    * rows outside W with a_j' beta < 0 are added to W (most violated first) and the LP is
      solved again;
    * otherwise beta separates every row weakly; rows with a_j' beta > 0 are strictly
      separated; a row with a_j' beta = 0 that lies in the span L_W of the non-strict rows of
      W is non-strict for every separating beta, because the cone of the full data lies in the
      cone of W, whose non-strict rows span a linear space on which every member vanishes;
    * remaining rows with a_j' beta = 0 are added to W.

    In particular, if the subsample shows no separation and its rows (x_i, 1) have full column
    rank, L_W is everything and the full data are proven not separated after one small LP:
    non-separability of such a subsample proves non-separability of the whole. W grows by at
    most max(``max_rows``, |W|) rows per round; the direction LP uses the same device for the
    strictly separated rows and enters the boundary rows as the linear equalities
    Q' beta = 0, Q a basis of their span. Zero and membership use relative tolerances:
    |a_j' beta| <= 1e-9 ||beta|| max_i ||a_i||, projection residual <= 1e-6 ||a_j||, span
    rank at 1e-9 of the largest singular value. All LPs use :func:`scipy.optimize.linprog`
    with the HiGHS solver on standardized features. Only the rows of W are standardized and
    held at once; every pass over all rows (a_j' beta, lengths, the span check, the QR that
    finds collinear features) runs on blocks of a few thousand rows, so memory beyond the
    input stays small at any n.

    For K > 2 each class is compared with the union of the others. Separation of one pair of
    classes that is not a one-versus-rest separation is not detected here; it also breaks the
    multinomial logistic MLE (Albert and Anderson 1984).

    References
    ----------
    .. [1] Albert, A. and Anderson, J. A. (1984). On the existence of maximum likelihood
       estimates in logistic regression models. Biometrika, 71(1), 1-10.
    .. [2] Stiemke, E. (1915). Über positive Lösungen homogener linearer Gleichungen.
       Mathematische Annalen, 76, 340-342.
    .. [3] Santner, T. J. and Duffy, D. E. (1986). A note on A. Albert and J. A. Anderson's
       conditions for the existence of maximum likelihood estimates in logistic regression
       models. Biometrika, 73(3), 755-758.

    Examples
    --------
    >>> import numpy as np
    >>> from discaudit.stats.separation import detect_separation
    >>> rng = np.random.default_rng(0)
    >>> X = np.vstack([rng.normal(0, 1, (50, 2)), rng.normal(0, 1, (50, 2)) + [8, 0]])
    >>> y = np.repeat(["a", "b"], 50)
    >>> res = detect_separation(X, y)
    >>> res.comparisons[0].kind, res.comparisons[0].separating_features[0]
    ('complete', 'x0')

    The classes are completely separated, mainly along ``x0``: an unpenalized logistic
    regression on these data has no finite maximum likelihood estimate.
    """
    values, names = as_matrix(X, min_rows=2)
    n = values.shape[0]
    codes, classes = as_labels(y, n)
    if len(classes) < 2:
        raise DataError(
            f"y has a single class ({classes[0]!r}); separation needs at least two classes. Check the target column."
        )
    if isinstance(max_rows, bool) or not isinstance(max_rows, (int, np.integer)) or max_rows < 2:
        raise DataError(f"max_rows must be an integer of at least 2; got {max_rows!r}.")

    counts = np.bincount(codes, minlength=len(classes))
    if moments is None:
        moments = ClassMoments.from_arrays(values, codes, tuple(classes))
    elif (
        moments.counts.shape != counts.shape
        or not np.array_equal(moments.counts, counts)
        or moments.n_features != values.shape[1]
    ):
        raise DataError(
            f"moments count {moments.counts.tolist()} rows per class over {moments.n_features} features, but the "
            f"data hold {counts.tolist()} over {values.shape[1]}; pass the moments of these rows (or none)."
        )
    space = _FeatureSpace(values, names, moments)
    seed = resolve_seed(random_state) if n > max_rows else None
    rng = np.random.default_rng(seed) if seed is not None else None

    if len(classes) == 2:
        plan = [(1, (classes[0],))]
    else:
        plan = [(k, tuple(c for j, c in enumerate(classes) if j != k)) for k in range(len(classes))]
    comparisons = []
    for k, versus in plan:
        positive = codes == k
        comparisons.append(
            _compare(
                space, positive, classes[k], versus, int(counts[k]), max_rows, rng, certify_overlap, certify_separation
            )
        )
    notes = []
    if space.dropped:
        notes.append(f"constant features ignored: {', '.join(space.dropped)}")
    if space.collinear:
        notes.append(f"features that are linear combinations of others (to 1e-9) ignored: {', '.join(space.collinear)}")
    return SeparationResult(
        comparisons=tuple(comparisons),
        any_complete=any(c.kind == "complete" for c in comparisons),
        any_quasi_complete=any(c.kind == "quasi_complete" for c in comparisons),
        classes=tuple(classes),
        feature_names=tuple(names),
        n_total=int(n),
        random_state=seed,
        max_rows=int(max_rows),
        notes=tuple(notes),
    )


def _row_slices(n: int) -> Iterator[slice]:
    """Consecutive blocks of at most ROW_BLOCK rows covering 0 .. n - 1."""
    for start in range(0, n, ROW_BLOCK):
        yield slice(start, min(start + ROW_BLOCK, n))


def _index_chunks(rows: IntArray) -> Iterator[tuple[slice, IntArray | slice]]:
    """Consecutive pieces of at most ROW_BLOCK of the sorted positions ``rows``, with their place.

    A piece of consecutive positions comes as a slice, which reads the rows without a gather.
    """
    for start in range(0, rows.size, ROW_BLOCK):
        place = slice(start, min(start + ROW_BLOCK, rows.size))
        chunk = rows[place]
        if chunk[-1] - chunk[0] == chunk.size - 1:
            yield place, slice(int(chunk[0]), int(chunk[-1]) + 1)
        else:
            yield place, chunk


class _FeatureSpace:
    """Standardized non-constant features (centred, divided by the divisor-n standard deviation).

    Only the raw values are held; standardized rows are made on demand for the rows asked for
    (a working set, or one block of at most ROW_BLOCK rows in a pass over all rows).
    """

    def __init__(self, values: FloatMatrix, names: list[str], moments: ClassMoments) -> None:
        n = values.shape[0]
        self.values = values
        self.names = names
        # The total mean and centred cross-products, from the per-class moments: W + B.
        self.mean = moments.grand_mean
        cross = moments.within_scatter + moments.between_scatter
        self.sd = np.sqrt(np.diag(cross) / n)
        if moments.minimum is not None and moments.maximum is not None:
            spread = moments.maximum.max(axis=0) - moments.minimum.min(axis=0)
        else:
            spread = np.ptp(values, axis=0)
        keep = (spread > 0) & (self.sd > 0)  # constant = min == max, exactly
        self.keep = np.flatnonzero(keep)
        self.dropped = [names[j] for j in np.flatnonzero(~keep)]
        independent = _independent_columns(self, cross)
        self.collinear = [names[j] for j in np.delete(self.keep, independent)]
        self.keep = self.keep[independent]
        self.q = self.keep.size
        self._largest_row_norm: float | None = None

    def design(self, rows: IntArray | slice, sign: npt.NDArray[np.float64] | None = None) -> FloatMatrix:
        """Rows (z_i, 1) at the given positions, z_i the standardized kept features; times s_i if ``sign``."""
        raw = self.values[rows]
        if self.keep.size < raw.shape[1]:
            raw = raw[:, self.keep]
        out = np.empty((raw.shape[0], self.keep.size + 1))
        np.subtract(raw, self.mean[self.keep], out=out[:, :-1])
        out[:, :-1] /= self.sd[self.keep]
        out[:, -1] = 1.0
        if sign is not None:
            out *= sign[rows, None]
        return out

    def largest_row_norm(self) -> float:
        """max_i ||(z_i, 1)|| (= max_i ||a_i|| in every comparison), by blocks, computed once."""
        if self._largest_row_norm is None:
            self._largest_row_norm = max(
                float(np.linalg.norm(self.design(rows), axis=1).max()) for rows in _row_slices(self.values.shape[0])
            )
        return self._largest_row_norm


def _independent_columns(space: _FeatureSpace, cross: FloatMatrix, tol: float = 1e-9) -> IntArray:
    """Positions in ``space.keep`` of a well-conditioned subset spanning (to ``tol``) the same space.

    A feature that is another's copy up to rounding adds nothing to separability but can make
    the linear programs numerically unsolvable, so it is left out (and named). The subset is
    the leading pivots of a pivoted QR of the standardized data Z, up to the rank at which the
    pivot falls below ``tol`` times the first.

    Z is never held whole. Its R factor is accumulated by Householder QR of each block of rows
    stacked under the R so far (TSQR, [1]_), and the pivoted QR runs on that R (at most q x q):
    the pivots and the diagonal of a pivoted QR depend on Z only through Z'Z = R'R. The first
    pivot is column 0, since all standardized columns tie in length (sqrt(n)).

    Before that, a screen: if the eigenvalues of the cross-product matrix G = Z'Z (from the
    total scatter W + B of the class moments that give the standardization) have ratio above
    c = _GRAM_SCREEN max(1, q / 100), all columns are kept without a QR. That is the QR's
    answer: each pivot of a QR of Z is at least sigma_min(Z) and the first at most
    sigma_max(Z), so all pivots exceed about sqrt(c) >= 1e-4, far above ``tol``, times the
    first. Rounding moves an eigenvalue of G by at most q times the error bound of an entry,
    (b + n / b + K + 3) 1.1e-16 lambda_max with b = 8,192 the rows per block of
    :meth:`ClassMoments.from_arrays` (the K + 3 for adding the K class scatters and the
    between-class part), i.e. below c / 10 lambda_max for n <= 1e8, so the screen cannot pass
    a G whose true ratio is below 0.9 c; closer cases go to the QR.

    References
    ----------
    .. [1] Demmel, J., Grigori, L., Hoemmen, M. and Langou, J. (2012). Communication-optimal
       parallel and sequential QR and LU factorizations. SIAM Journal on Scientific Computing,
       34(1), A206-A239.
    """
    q = space.keep.size
    if q < 2:
        return np.arange(q)
    scale = space.sd[space.keep]
    gram = cross[np.ix_(space.keep, space.keep)] / np.outer(scale, scale)
    eigenvalues = np.linalg.eigvalsh(gram)
    if eigenvalues[0] > _GRAM_SCREEN * max(1.0, q / 100) * eigenvalues[-1]:
        return np.arange(q)
    from scipy import linalg

    R = _stacked_r(space)
    # Every standardized column has length sqrt(n), so the first pivot is a tie that rounding
    # would break (differently for another order of the rows): take column 0. Projecting it
    # out leaves R[1:, 1:], whose pivoted QR gives the other pivots. R has min(n, q) >= 2 rows.
    tail, piv = linalg.qr(R[1:, 1:], mode="r", pivoting=True, check_finite=False)
    order = np.concatenate([[0], 1 + piv])
    diag = np.abs(np.concatenate([R[:1, 0], np.diag(tail)]))
    rank = int(np.sum(diag > tol * diag[0]))
    return np.sort(order[: max(rank, 1)])


def _stacked_r(space: _FeatureSpace) -> FloatMatrix:
    """R factor (at most q x q) of the standardized kept features, by Householder QR of row blocks."""
    R = np.zeros((0, space.keep.size))
    for rows in _row_slices(space.values.shape[0]):
        # numpy's stubs type every mode's result as QRResult; mode "r" returns the array R.
        R = cast(FloatMatrix, np.linalg.qr(np.vstack([R, space.design(rows)[:, :-1]]), mode="r"))
    return R


class _SignedRows:
    """Rows a_i = s_i (z_i, 1) of one comparison, made on demand: a working set or one block at a time."""

    def __init__(self, space: _FeatureSpace, sign: npt.NDArray[np.float64]) -> None:
        self.space = space
        self.sign = sign
        self.n = sign.size
        self.d = space.q + 1

    def take(self, rows: IntArray | slice) -> FloatMatrix:
        """The rows at the given positions, as a matrix."""
        return self.space.design(rows, self.sign)

    def products(self, beta: npt.NDArray[np.float64], rows: IntArray) -> npt.NDArray[np.float64]:
        """a_i' beta for the given rows (as s_i ((z_i, 1)' beta): the same number, one pass less)."""
        out = np.empty(rows.size)
        for place, chunk in _index_chunks(rows):
            out[place] = self.space.design(chunk) @ beta
            out[place] *= self.sign[chunk]
        return out

    def mean(self, rows: IntArray) -> npt.NDArray[np.float64]:
        """Mean of the given rows, summed block by block."""
        total = np.zeros(self.d)
        for _, chunk in _index_chunks(rows):
            total += self.take(chunk).sum(axis=0)
        return total / rows.size


def _compare(
    space: _FeatureSpace,
    positive: npt.NDArray[np.bool_],
    label: Any,
    versus: tuple[Any, ...],
    n_positive: int,
    max_rows: int,
    rng: np.random.Generator | None,
    certify_overlap: bool = True,
    certify_separation: bool = True,
) -> SeparationComparison:
    n = positive.size
    sign = np.where(positive, 1.0, -1.0)
    if space.q == 0:  # no varying feature: an intercept alone cannot separate two classes
        return _not_separated(label, versus, n_used=n, n_total=n)
    if n > max_rows and rng is not None:
        start = _stratified_rows(positive, n_positive, max_rows, rng)
    else:
        start = np.arange(n)
    A = _SignedRows(space, sign)
    strict, beta_detect, boundary_span, used = _maximal_strict_set(
        A, start, max_rows, certify_overlap, certify_separation
    )
    if not strict.any():
        return _not_separated(label, versus, n_used=used, n_total=n)
    beta = _min_l1_direction(A, strict, boundary_span, max_rows)
    if beta is None:  # only through solver tolerances: keep the detection LP's hyperplane
        beta = beta_detect
    return _separated(space, label, versus, A, beta, strict, n_used=used)


def _certificate(
    A: FloatMatrix, row_norm: Callable[[], float], *, overlap: bool = True, separation: bool = True
) -> tuple[str, npt.NDArray[np.float64]] | None:
    """A proof about the rows of A from Newton's method for the logistic likelihood, or None.

    ``("overlap", lambda)``: weights lambda > 0 with A' lambda = 0 (to the rounding bound), A of
    full column rank, which prove that no beta != 0 has A beta >= 0 (Stiemke's alternative).
    They are sought among the linearized weights of Newton's method for the logistic likelihood
    sum_i log(1 + exp(-a_i' beta)); see the Notes of :func:`detect_separation` for the rounding
    bound. ``("separated", beta)``: an iterate beta with a_i' beta above the zero tolerance
    1e-9 ||beta|| ``row_norm()`` on every row of A, which proves the rows of A strictly separated
    (``row_norm`` is called only for an iterate positive on every row: it may cost a pass over
    the data). None means "not proven": the LP decides. ``overlap`` and ``separation`` say which
    to seek.
    """
    m, d = A.shape
    singular = None
    if overlap and m > d:
        singular = np.linalg.svd(np.linalg.qr(A, mode="r"), compute_uv=False)
        if not singular[-1] > _CERTIFICATE_RANK * singular[0]:
            singular = None
    if singular is None and not separation:
        return None
    lengths = np.linalg.norm(A, axis=1)
    gamma = m * _UNIT_ROUNDOFF / (1.0 - m * _UNIT_ROUNDOFF)
    beta = np.zeros(d)
    values = np.zeros(m)
    for count in range(1, (_SEPARATION_STEPS if separation else _CERTIFICATE_STEPS) + 1):
        lam = expit(-values)
        w = lam * (1.0 - lam)
        try:
            factor = linalg.cho_factor((A * w[:, None]).T @ A, check_finite=False)
        except linalg.LinAlgError:  # weights underflowed: the rows look separated
            return None
        step = linalg.cho_solve(factor, A.T @ lam, check_finite=False)
        if not np.all(np.isfinite(step)):
            return None
        if singular is not None and count <= _CERTIFICATE_STEPS:
            mu: npt.NDArray[np.float64] = lam - w * (A @ step)
            smallest = float(mu.min())
            if smallest > 0:
                drift = float(np.linalg.norm(A.T @ mu)) + gamma * float(mu @ lengths)
                if drift <= 0.5 * smallest * float(singular[-1]):
                    return "overlap", mu
        beta += step
        values = A @ beta
        if separation and np.all(values > 0.0):
            if np.all(values > _VALUE_TOL * float(np.linalg.norm(beta)) * row_norm()):
                return "separated", beta.copy()
    return None


def _not_separated(label: Any, versus: tuple[Any, ...], *, n_used: int, n_total: int) -> SeparationComparison:
    return SeparationComparison(
        label=label,
        versus=versus,
        kind="none",
        direction=None,
        coefficients=None,
        intercept=None,
        margin=None,
        separating_features=(),
        boundary_rows=(),
        n_used=int(n_used),
        subsampled=n_used < n_total,
    )


def _separated(
    space: _FeatureSpace,
    label: Any,
    versus: tuple[Any, ...],
    A: _SignedRows,
    beta: npt.NDArray[np.float64],
    strict: npt.NDArray[np.bool_],
    *,
    n_used: int,
) -> SeparationComparison:
    """Package a separating hyperplane found on the standardized features."""
    n = strict.size
    w_kept, b = beta[:-1], beta[-1]
    norm = float(np.linalg.norm(w_kept))
    w_kept, b = w_kept / norm, b / norm
    w_kept = np.where(np.abs(w_kept) < _ZERO_COEF, 0.0, w_kept)
    p = len(space.names)
    direction = np.zeros(p)
    direction[space.keep] = w_kept
    coefs = np.zeros(p)
    coefs[space.keep] = w_kept / space.sd[space.keep]
    intercept = b - float(coefs @ space.mean)
    margin = float(np.min(A.products(np.append(w_kept, b), np.flatnonzero(strict))))
    order = np.argsort(-np.abs(direction), kind="stable")
    return SeparationComparison(
        label=label,
        versus=versus,
        kind="complete" if strict.all() else "quasi_complete",
        direction={space.names[j]: float(direction[j]) for j in range(p)},
        coefficients={space.names[j]: float(coefs[j]) for j in range(p)},
        intercept=float(intercept),
        margin=margin,
        separating_features=tuple(space.names[j] for j in order if direction[j] != 0.0),
        boundary_rows=tuple(int(i) for i in np.flatnonzero(~strict)),
        n_used=int(n_used),
        subsampled=n_used < n,
    )


def _stratified_rows(
    positive: npt.NDArray[np.bool_], n_positive: int, max_rows: int, rng: np.random.Generator
) -> IntArray:
    """Sorted positions of up to ``max_rows`` rows, balanced between the two sides."""
    n_negative = positive.size - n_positive
    take_pos = min(n_positive, max(max_rows // 2, max_rows - n_negative))
    take_neg = min(n_negative, max_rows - take_pos)
    pos = rng.choice(np.flatnonzero(positive), size=take_pos, replace=False)
    neg = rng.choice(np.flatnonzero(~positive), size=take_neg, replace=False)
    return np.sort(np.concatenate([pos, neg]))


def _right_singular(rows: FloatMatrix) -> tuple[npt.NDArray[np.float64], FloatMatrix]:
    """Singular values and right singular vectors of a tall matrix, via its R factor (no U)."""
    small = np.linalg.qr(rows, mode="r") if rows.shape[0] > rows.shape[1] else rows
    _, s, Vt = np.linalg.svd(small, full_matrices=True)
    s = np.concatenate([s, np.zeros(Vt.shape[0] - s.size)])
    return s, Vt


def _row_space(rows: FloatMatrix) -> tuple[FloatMatrix, FloatMatrix]:
    """Orthonormal bases (d x r, d x (d - r)) of the span of the rows and of its complement.

    The rank r counts singular values above _SPAN_TOL times the largest.
    """
    d = rows.shape[1]
    if rows.shape[0] == 0:
        return np.zeros((d, 0)), np.eye(d)
    s, Vt = _right_singular(rows)
    r = int(np.sum(s > _SPAN_TOL * s[0])) if s[0] > 0 else 0
    return Vt[:r].T, Vt[r:].T


def _outside_span(
    A: _SignedRows, rows: IntArray, complement: FloatMatrix
) -> tuple[npt.NDArray[np.bool_], npt.NDArray[np.float64]]:
    """Rows whose component orthogonal to the span exceeds _MEMBER_TOL times their length.

    Returns that mask over ``rows`` and the lengths ||a_i|| of the rows it selects.
    """
    if complement.shape[1] == 0:
        return np.zeros(rows.size, dtype=bool), np.zeros(0)
    outside = np.empty(rows.size, dtype=bool)
    lengths = np.empty(rows.size)
    for place, chunk in _index_chunks(rows):
        block = A.space.design(chunk)  # the signs s_i change neither length
        lengths[place] = np.linalg.norm(block, axis=1)
        outside[place] = np.linalg.norm(block @ complement, axis=1) > _MEMBER_TOL * lengths[place]
    return outside, lengths[outside]


def _grow(work: IntArray, candidates: IntArray, score: npt.NDArray[np.float64], chunk: int) -> IntArray:
    """Add the candidates with the smallest score, at most max(chunk, |work|) of them."""
    take = max(chunk, work.size)
    if candidates.size > take:
        candidates = candidates[np.argpartition(score, take - 1)[:take]]
    return np.union1d(work, candidates)


def _maximal_strict_set(
    A: _SignedRows, start: IntArray, chunk: int, certify_overlap: bool = True, certify_separation: bool = True
) -> tuple[npt.NDArray[np.bool_], npt.NDArray[np.float64], FloatMatrix, int]:
    """Rows i with a_i' beta > 0 for some beta in the cone C = {beta : A beta >= 0}.

    Solves max sum t  s.t.  a_i' beta >= t_i, 0 <= t_i <= 1, beta free, over a working set W
    of rows (starting at ``start``), and certifies the answer for the other rows:

    * a row j outside W with a_j' beta < 0 is violated: W grows (most violated first);
    * otherwise (beta in C) a row with a_j' beta > 0 is strict;
    * a row with a_j' beta = 0 that lies in the span L_W of the non-strict rows of W is
      non-strict for every member of C (C lies in the cone of W, whose non-strict rows are
      implicit equalities with a linear conic hull); any other such row joins W.

    Before each program (if ``certify_overlap``) the overlap certificate is tried on W: when it
    holds, the program would find no strict row and a full-rank W, so the answer (no strict
    row, |W|) is returned without it. If instead (and ``certify_separation``) an iterate of the
    same Newton steps makes every row of W strict, it stands in for the program's solution
    (t = 1 on W, no boundary row); the rows outside W are then checked as after a program.

    Returns the strict mask over all rows, the final beta (a member of C), an orthonormal
    basis of the span of all non-strict rows (= L_W at the end) and |W|.
    """
    n = A.n
    work = np.asarray(start, dtype=np.intp)
    while True:
        rows = A.take(work)
        found = _certificate(rows, A.space.largest_row_norm, overlap=certify_overlap, separation=certify_separation)
        if found is not None and found[0] == "overlap":
            # Proven: no beta != 0 has A_W beta >= 0, so no row is strict for any separating beta.
            return np.zeros(n, dtype=bool), np.zeros(A.d), np.eye(A.d), int(work.size)
        if found is not None:  # every row of W strict for this beta: what the program would find
            beta, t = found[1], np.ones(work.size)
        else:
            beta, t = _strict_lp(rows)
        strict_w = t > 0.5
        span, complement = _row_space(A.take(work[~strict_w]))
        strict = np.zeros(n, dtype=bool)
        strict[work[strict_w]] = True
        in_work = np.zeros(n, dtype=bool)
        in_work[work] = True
        outside = np.flatnonzero(~in_work)
        if outside.size == 0:
            return strict, beta, span, int(work.size)
        if beta.any():
            values = A.products(beta, outside)
            tol = _VALUE_TOL * float(np.linalg.norm(beta)) * A.space.largest_row_norm()
        else:  # every a_j' beta is exactly zero: no pass over the rows is needed
            values, tol = np.zeros(outside.size), 0.0
        violated = values < -tol
        if violated.any():
            work = _grow(work, outside[violated], values[violated], chunk)
            continue
        positive = values > tol
        zero = outside[~positive]
        off_span, lengths = _outside_span(A, zero, complement)
        unresolved = zero[off_span]
        if unresolved.size:
            work = _grow(work, unresolved, -lengths, chunk)
            continue
        strict[outside[positive]] = True
        return strict, beta, span, int(work.size)


def _strict_lp(A: FloatMatrix) -> tuple[npt.NDArray[np.float64], npt.NDArray[np.float64]]:
    """Solve max sum t s.t. A beta - t >= 0, 0 <= t <= 1, beta free; return (beta, t)."""
    m, d = A.shape
    A_ub = sparse.hstack([sparse.csr_matrix(-A), sparse.identity(m, format="csr")], format="csr")
    c = np.concatenate([np.zeros(d), -np.ones(m)])
    res = _solve(c, A_ub, np.zeros(m), None, None, [(None, None)] * d + [(0.0, 1.0)] * m)
    for box in _BETA_BOXES:
        if res.status == 0:
            break
        # The program is feasible (beta = 0) and bounded (t <= 1), so a failure is numerical:
        # tied or nearly dependent columns (on these rows) can leave HiGHS without a usable
        # basis. Boxing beta (standardized units) gives it one; only rows whose best margin
        # is below 1 / box of a unit-length direction could change status.
        res = _solve(c, A_ub, np.zeros(m), None, None, [(-box, box)] * d + [(0.0, 1.0)] * m)
    if res.status != 0:
        raise DataError(
            f"the separation linear program failed (HiGHS status {res.status}: {res.message}) on "
            f"{m} rows and {d - 1} feature coordinates; check for extreme values or drop "
            "near-duplicate features."
        )
    return np.asarray(res.x[:d], dtype=np.float64), np.asarray(res.x[d:], dtype=np.float64)


def _min_l1_direction(
    A: _SignedRows, strict: npt.NDArray[np.bool_], Q: FloatMatrix, chunk: int
) -> npt.NDArray[np.float64] | None:
    """beta = (w, b) minimizing ||w||_1 s.t. a_i' beta >= 1 on strict rows, = 0 on the others.

    The boundary rows enter as the equalities Q' beta = 0, Q an orthonormal basis of their span
    (equivalent to a_i' beta >= 0 there, because every separating beta is zero on them); the
    strict rows enter through a working set grown with the violated rows. Returns None if a
    program is reported infeasible (possible only through solver tolerances).
    """
    d = A.d
    q = d - 1
    strict_rows = np.flatnonzero(strict)
    eye = sparse.identity(q, format="csr")
    zero_col = sparse.csr_matrix((q, 1))
    l1_rows = sparse.vstack([sparse.hstack([eye, zero_col, -eye]), sparse.hstack([-eye, zero_col, -eye])], format="csr")
    A_eq = np.hstack([Q.T, np.zeros((Q.shape[1], q))]) if Q.shape[1] else None
    b_eq = np.zeros(Q.shape[1]) if Q.shape[1] else None
    c = np.concatenate([np.zeros(d), np.ones(q)])
    bounds = [(None, None)] * d + [(0.0, None)] * q
    if strict_rows.size > chunk:
        # The mean of the rows is a cheap guess of a direction: start from the rows it finds hardest.
        guess = A.products(A.mean(strict_rows), strict_rows)
        work = strict_rows[np.argpartition(guess, chunk - 1)[:chunk]]
        work = np.sort(work)
    else:
        work = strict_rows
    while True:
        m = work.size
        A_ub = sparse.vstack(
            [sparse.hstack([sparse.csr_matrix(-A.take(work)), sparse.csr_matrix((m, q))]), l1_rows], format="csr"
        )
        b_ub = np.concatenate([-np.ones(m), np.zeros(2 * q)])
        res = _solve(c, A_ub, b_ub, A_eq, b_eq, bounds)
        if res.status != 0:
            return None
        beta = np.asarray(res.x[:d], dtype=np.float64)
        values = A.products(beta, strict_rows)
        violated = values < 1.0 - 1e-7
        if not violated.any():
            return beta
        work = _grow(work, strict_rows[violated], values[violated], chunk)


def _solve(c: Any, A_ub: Any, b_ub: Any, A_eq: Any, b_eq: Any, bounds: Any) -> Any:
    """HiGHS, retried with its dual simplex and then its interior-point solver when a method fails.

    Nearly collinear or tied features occasionally make one HiGHS method stop with status 4
    (numerical difficulties), or even report a program that is feasible and bounded by
    construction as infeasible (2) or unbounded (3), where another method solves it.
    """
    res = None
    for method in ("highs", "highs-ds", "highs-ipm"):
        with np.errstate(all="ignore"):
            res = linprog(c, A_ub=A_ub, b_ub=b_ub, A_eq=A_eq, b_eq=b_eq, bounds=bounds, method=method)
        if res.status == 0:
            return res
    return res
