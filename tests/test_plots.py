"""Diagnostic plots: what is drawn equals what the findings hold, checked against outside references.

Outside references: scipy (chi-square quantiles, Mahalanobis distances via ``cdist``),
statsmodels (``ProbPlot`` plotting positions, ``variance_inflation_factor`` with an intercept),
scikit-learn (``LinearDiscriminantAnalysis(solver="eigen").scalings_`` for the discriminant
plane, ``PCA`` for the second axis with two classes), numpy and pandas (class covariances and
pooled within-class standard deviations recomputed from the rows). The closed form
chi-square(2) quantile -2 ln(1 - q) (exact for 2 degrees of freedom) checks the ellipse size.
Verdicts come from the invented demo data (``flakes``) and small invented sets.
"""

from __future__ import annotations

import builtins
import io

import matplotlib

matplotlib.use("Agg")

import numpy as np
import pandas as pd
import pytest
from matplotlib.figure import Figure
from matplotlib.patches import Ellipse
from scipy import stats as sps
from scipy.spatial.distance import cdist

import discaudit
from discaudit.plot import (
    PLOTTED_CHECKS,
    _common,
    plot_verdict,
    plottable,
)
from discaudit.plot import outliers as outlier_plot

TARGET = "family"


@pytest.fixture(scope="module")
def demo(flakes) -> discaudit.Verdict:
    frame, _ = flakes
    return discaudit.preflight(frame, target=TARGET, random_state=0)


@pytest.fixture(scope="module")
def outlier_figure(demo) -> Figure:
    return plot_verdict(demo, "outliers")


def _panel(fig: Figure, title_part: str):
    return next(ax for ax in fig.axes if title_part in ax.get_title(loc="left"))


def _gids(ax, prefix: str) -> list:
    return [a for a in [*ax.lines, *ax.texts, *ax.patches, *ax.collections] if (a.get_gid() or "").startswith(prefix)]


def _class_frames(flakes):
    frame, _ = flakes
    X = frame.drop(columns=[TARGET])
    return X, frame[TARGET]


# --- every plot builds -------------------------------------------------------------------------


@pytest.mark.parametrize("check", PLOTTED_CHECKS)
def test_each_plot_builds_on_the_demo_data(demo, check):
    fig = demo.plot(check)
    assert isinstance(fig, Figure) and fig.axes
    fig.savefig(io.BytesIO(), format="png", dpi=30)  # draws every artist


def test_every_plotted_check_has_something_to_draw_on_the_demo(demo):
    assert plottable(demo) == list(PLOTTED_CHECKS)


def test_plot_on_a_given_axes_returns_its_figure(demo):
    fig = Figure()
    ax = fig.subplots()
    assert demo.plot("collinearity", ax=ax) is fig
    assert ax.patches  # the VIF bars


def test_bad_arguments_raise_value_error(demo):
    with pytest.raises(ValueError, match="No plot for check 'separation'"):
        demo.plot("separation")
    fig = Figure()
    with pytest.raises(ValueError, match="overview"):
        demo.plot(ax=fig.subplots())


# --- outliers ------------------------------------------------------------------------------------


def test_cutoff_line_equals_the_findings_cutoff(demo, outlier_figure):
    per_class = demo.findings["outliers"].details["per_class"]
    p = demo.meta["n_features"]
    for k, name in enumerate(demo.meta["classes"]):
        ax = _panel(outlier_figure, f"Outliers in class {name}")
        (line,) = _gids(ax, f"cutoff:{k}")
        y = line.get_ydata()
        assert y[0] == y[1] == pytest.approx(per_class[name]["cutoff"], rel=1e-12)
        # the default rule: the scaled F(p, m - p) 0.975 quantile for m fitted rows (scipy)
        m = per_class[name]["fit_internals"]["n_reweighted"]
        assert per_class[name]["fit_internals"]["p_used"] == p
        expected = p * (m - 1) * (m + 1) / (m * (m - p)) * sps.f.ppf(0.975, p, m - p)
        assert per_class[name]["cutoff"] == pytest.approx(expected, rel=1e-12)


def test_labelled_points_are_the_flagged_rows_farthest_first(demo, outlier_figure):
    rows = demo.outlier_rows()
    for k, name in enumerate(demo.meta["classes"]):
        ax = _panel(outlier_figure, f"Outliers in class {name}")
        labels = [t.get_text() for t in _gids(ax, f"flag-label:{k}")]
        expected = rows[rows["class"] == name]
        assert len(labels) == min(len(expected), outlier_plot.LABEL_CAP)
        assert sorted(labels) == sorted(map(str, expected.index[: outlier_plot.LABEL_CAP]))


def test_the_label_cap_keeps_the_farthest(demo, monkeypatch):
    monkeypatch.setattr(outlier_plot, "LABEL_CAP", 3)
    fig = plot_verdict(demo, "outliers")
    rows = demo.outlier_rows()
    for k, name in enumerate(demo.meta["classes"]):
        ax = _panel(fig, f"Outliers in class {name}")
        labels = {t.get_text() for t in _gids(ax, f"flag-label:{k}")}
        farthest = rows[rows["class"] == name].sort_values("squared_distance", ascending=False).index[:3]
        assert labels == set(map(str, farthest))


def test_one_panel_version_labels_at_most_the_combined_cap(demo):
    fig = Figure()
    ax = fig.subplots()
    demo.plot("outliers", ax=ax)
    counts = demo.outlier_rows()["class"].value_counts()
    for k, name in enumerate(demo.meta["classes"]):
        assert len(_gids(ax, f"flag-label:{k}")) == min(int(counts.get(name, 0)), outlier_plot.COMBINED_LABEL_CAP)
        assert len(_gids(ax, f"cutoff:{k}")) == 1


def test_planted_contaminated_flakes_are_labelled(demo, flakes, outlier_figure):
    _, planted = flakes
    shown = {
        t.get_text() for ax in outlier_figure.axes for t in ax.texts if (t.get_gid() or "").startswith("flag-label")
    }
    assert set(planted["contaminated"]) <= shown


def test_outlier_qq_positions_match_statsmodels(demo, outlier_figure):
    from statsmodels.graphics.gofplots import ProbPlot

    ax = _panel(outlier_figure, "chi-square Q-Q")
    arrays = demo.findings["outliers"].arrays
    p = demo.meta["n_features"]
    for k, name in enumerate(demo.meta["classes"]):
        (points,) = _gids(ax, f"qq:{k}")
        xy = points.get_offsets()
        d = arrays["squared_distance"][arrays["classes"][arrays["code"]] == name]
        assert len(demo.findings["outliers"].details["per_class"][name]["features_used"]) == p
        # statsmodels' plotting positions (i - a) / (n + 1 - 2a) with a = 0.5 are (i - 0.5) / n
        reference = ProbPlot(d, dist=sps.chi2, distargs=(p,), a=0.5, fit=False).theoretical_quantiles
        np.testing.assert_allclose(xy[:, 0], reference, rtol=1e-12)
        np.testing.assert_allclose(xy[:, 1], np.sort(d), rtol=1e-12)


# --- normality -----------------------------------------------------------------------------------


def test_normality_qq_uses_classical_mahalanobis_distances(demo, flakes):
    X, y = _class_frames(flakes)
    fig = plot_verdict(demo, "normality")
    p = X.shape[1]
    for k, name in enumerate(demo.meta["classes"]):
        ax = _panel(fig, f"class {name}")
        (points,) = _gids(ax, f"normal-qq:{k}")
        xy = points.get_offsets()
        Xk = X[y == name].to_numpy()
        # scipy's Mahalanobis distance with the inverse unbiased class covariance (numpy)
        d = cdist(Xk, Xk.mean(axis=0)[None, :], "mahalanobis", VI=np.linalg.inv(np.cov(Xk, rowvar=False)))[:, 0] ** 2
        np.testing.assert_allclose(xy[:, 1], np.sort(d), rtol=1e-6)
        np.testing.assert_allclose(xy[:, 0], sps.chi2.ppf((np.arange(1, len(d) + 1) - 0.5) / len(d), p), rtol=1e-12)
        assert (
            "FAIL" in ax.get_title(loc="left")
            or "WARN" in ax.get_title(loc="left")
            or "PASS" in ax.get_title(loc="left")
        )


# --- covariance ellipses -------------------------------------------------------------------------


def test_ellipses_drawn_per_class_classical_and_robust(demo):
    fig = plot_verdict(demo, "covariance_homogeneity")
    ax = fig.axes[0]
    K = demo.meta["n_classes"]
    classical = [p for p in ax.patches if isinstance(p, Ellipse) and p.get_gid().startswith("ellipse:classical")]
    robust = [p for p in ax.patches if isinstance(p, Ellipse) and p.get_gid().startswith("ellipse:robust")]
    assert len(classical) == K
    # every demo class has 150 >= 2(p+1) rows, so every class has an MCD fit
    assert len(robust) == K
    assert {p.get_linestyle() for p in robust} != {p.get_linestyle() for p in classical}


def test_discriminant_plane_matches_sklearn_and_ellipses_match_projected_covariances(demo, flakes):
    from sklearn.discriminant_analysis import LinearDiscriminantAnalysis

    X, y = _class_frames(flakes)
    arrays = demo.findings["covariance_homogeneity"].arrays
    A = arrays["plane_basis"]
    lda = LinearDiscriminantAnalysis(solver="eigen").fit(X.to_numpy(), y.to_numpy())
    B = lda.scalings_[:, :2]
    # same plane: the orthogonal projectors onto span(A) and span(B) agree
    proj = lambda M: M @ np.linalg.pinv(M)  # noqa: E731
    np.testing.assert_allclose(proj(A), proj(B), atol=1e-6)
    # unit pooled within-class variance on each axis, uncorrelated (numpy on class-centred rows)
    centred = X - X.groupby(y).transform("mean")
    S = centred.to_numpy().T @ centred.to_numpy() / (len(X) - demo.meta["n_classes"])
    np.testing.assert_allclose(A.T @ S @ A, np.eye(2), atol=1e-8)
    fig = plot_verdict(demo, "covariance_homogeneity")
    ax = fig.axes[0]
    q = -2.0 * np.log(1.0 - 0.95)  # chi-square(2) quantile in closed form
    for k, name in enumerate(demo.meta["classes"]):
        Z = X[y == name].to_numpy() @ A
        cov = np.cov(Z, rowvar=False)
        (ellipse,) = [p for p in ax.patches if p.get_gid() == f"ellipse:classical:{k}"]
        np.testing.assert_allclose(ellipse.center, Z.mean(axis=0), rtol=1e-9)
        values = np.linalg.eigvalsh(cov)
        assert ellipse.width == pytest.approx(2 * np.sqrt(q * values[1]), rel=1e-8)
        assert ellipse.height == pytest.approx(2 * np.sqrt(q * values[0]), rel=1e-8)
    # the planted wide family has the largest ellipse
    areas = {
        n: np.prod(np.linalg.eigvalsh(np.cov(X[y == n].to_numpy() @ A, rowvar=False))) for n in demo.meta["classes"]
    }
    assert max(areas, key=areas.__getitem__) == flakes[1]["different_covariance_family"]


def test_two_classes_use_a_within_class_principal_component(flakes):
    from sklearn.decomposition import PCA

    frame, _ = flakes
    two = frame[frame[TARGET].isin(["HDPE", "PS"])]
    v = discaudit.preflight(two, target=TARGET, random_state=0)
    arrays = v.findings["covariance_homogeneity"].arrays
    assert "principal component" in arrays["plane_axis_labels"][1]
    X, y = two.drop(columns=[TARGET]), two[TARGET]
    centred = (X - X.groupby(y).transform("mean")).to_numpy()
    sd = centred.std(axis=0, ddof=0)
    Z = centred / sd
    d, u = arrays["plane_basis"].T
    d_std = d * sd / np.linalg.norm(d * sd)
    u_std = u * sd / np.linalg.norm(u * sd)
    assert abs(d_std @ u_std) < 1e-10  # orthogonal in standardized coordinates
    # scikit-learn's PCA of the standardized class-centred rows with direction 1 projected out
    residual = Z - np.outer(Z @ d_std, d_std)
    top = PCA(n_components=1).fit(residual).components_[0]
    assert abs(abs(top @ u_std) - 1.0) < 1e-8
    fig = v.plot("covariance_homogeneity")
    assert len([p for p in fig.axes[0].patches if p.get_gid().startswith("ellipse:classical")]) == 2
    assert "principal component" in fig.axes[0].get_ylabel().replace("\n", " ")


def test_plane_is_invariant_to_rescaling_a_feature(flakes):
    frame, _ = flakes
    a = discaudit.preflight(frame, target=TARGET, random_state=0).findings["covariance_homogeneity"].arrays
    rescaled = frame.assign(thickness_um=frame["thickness_um"] / 1000.0, nir_1100=frame["nir_1100"] * 50.0)
    b = discaudit.preflight(rescaled, target=TARGET, random_state=0).findings["covariance_homogeneity"].arrays
    np.testing.assert_allclose(a["plane_means"], b["plane_means"], rtol=1e-6, atol=1e-6)
    np.testing.assert_allclose(a["plane_covariances"], b["plane_covariances"], rtol=1e-6, atol=1e-9)


# --- collinearity and scale ----------------------------------------------------------------------


def test_vif_bars_match_statsmodels_and_thresholds_are_marked(demo, flakes):
    from statsmodels.stats.outliers_influence import variance_inflation_factor

    X, y = _class_frames(flakes)
    centred = (X - X.groupby(y).transform("mean")).to_numpy()
    design = np.column_stack([np.ones(len(centred)), centred])  # VIF with an intercept
    reference = {name: variance_inflation_factor(design, j + 1) for j, name in enumerate(X.columns)}
    fig = plot_verdict(demo, "collinearity")
    ax = fig.axes[0]
    for name, value in reference.items():
        (bar,) = [p for p in ax.patches if p.get_gid() == f"vif-bar:{name}"]
        assert bar.get_width() == pytest.approx(value, rel=1e-6)
        level = "fail" if value > 10 else "warn" if value > 5 else "pass"
        assert (bar.get_hatch() or "") == _common.LEVELS[level][1]  # level shown by hatching, not colour alone
    assert ax.get_xscale() == "log"
    (warn,) = _gids(ax, "vif-warn")
    (fail,) = _gids(ax, "vif-fail")
    assert warn.get_xdata()[0] == 5.0 and fail.get_xdata()[0] == 10.0


def test_near_dependencies_are_annotated():
    rng = np.random.default_rng(11)  # invented: x3 = x1 + x2 + small noise within each class
    n = 200
    X = rng.normal(size=(2 * n, 4))
    X[:, 2] = X[:, 0] + X[:, 1] + 0.02 * rng.normal(size=2 * n)
    X[n:, :] += 1.0
    v = discaudit.preflight(pd.DataFrame(X, columns=["a", "b", "c", "d"]), np.repeat(["u", "w"], n), random_state=0)
    deps = v.findings["collinearity"].details["near_dependencies"]
    assert deps and set(deps[0]["features"]) == {"a", "b", "c"}
    ax = v.plot("collinearity").axes[0]
    tagged = {t.get_gid().split(":", 1)[1] for t in _gids(ax, "dependency-tag:")}
    assert tagged == {"a", "b", "c"}
    assert "[1] index" in ax.get_xlabel()  # under the axis, never over a bar


def test_scale_bars_match_pooled_within_class_sd(demo, flakes):
    X, y = _class_frames(flakes)
    centred = X - X.groupby(y).transform("mean")  # pandas
    sd = np.sqrt((centred**2).sum() / (len(X) - y.nunique()))
    ax = plot_verdict(demo, "scale_disparity").axes[0]
    assert ax.get_xscale() == "log"
    for name, value in sd.items():
        (bar,) = [p for p in ax.patches if p.get_gid() == f"sd-bar:{name}"]
        assert bar.get_width() == pytest.approx(value, rel=1e-9)
    (thick,) = [p for p in ax.patches if p.get_gid() == "sd-bar:thickness_um"]
    assert thick.get_hatch() == _common.LEVELS["warn"][1]


# --- overview, status and palette ----------------------------------------------------------------


def test_overview_has_a_panel_per_plotted_warning_check_and_spells_out_status(demo):
    fig = demo.plot()
    bad = [k for k in PLOTTED_CHECKS if demo.findings[k].status in ("warn", "fail")]
    titled = [ax.get_title(loc="left") for ax in fig.axes if ax.get_visible() and ax.axison]
    assert len(titled) == len(bad)
    for title in titled:
        assert "WARN" in title or "FAIL" in title
    others = [k for k, f in demo.findings.items() if f.status in ("warn", "fail") and k not in PLOTTED_CHECKS]
    text = " ".join(t.get_text() for ax in fig.axes for t in ax.texts)
    for key in others:
        assert key in text


def test_overview_of_a_clean_verdict_says_so(demo):
    import dataclasses

    clean = dataclasses.replace(
        demo, findings={k: dataclasses.replace(f, status="pass") for k, f in demo.findings.items()}, status="pass"
    )
    fig = clean.plot()
    assert any("nothing to show" in t.get_text() for ax in fig.axes for t in ax.texts)


def test_class_colours_come_from_the_okabe_ito_palette():
    # Okabe & Ito (2008), "Color Universal Design": the eight colours, as published
    published = {"#E69F00", "#56B4E9", "#009E73", "#F0E442", "#0072B2", "#D55E00", "#CC79A7", "#000000"}
    assert {_common.class_color(k) for k in range(8)} == published
    assert len({_common.class_marker(k) for k in range(8)}) == 8


# --- hostile labels, missing data, missing matplotlib -------------------------------------------


def test_labels_with_dollar_signs_and_markup_draw_literally():
    rng = np.random.default_rng(5)  # invented
    names = ["$\\frac{$", "<script>alert(1)</script>", "plain"]
    X = pd.DataFrame(rng.normal(size=(80, 3)), columns=names, index=[f"r${i}" for i in range(80)])
    X.iloc[3] = [9.0, -9.0, 9.0]  # one far row, so a label is drawn
    y = np.repeat(["$a$", "b"], 40)
    v = discaudit.preflight(X, y, random_state=0)
    for check in plottable(v):
        v.plot(check).savefig(io.BytesIO(), format="png", dpi=30)  # mathtext would fail on an unbalanced $
    fig = v.plot("outliers")
    assert any(t.get_text() == "r\\$3" for ax in fig.axes for t in ax.texts)


def test_a_skipped_check_draws_a_message_and_is_not_plottable(flakes):
    frame, _ = flakes
    v = discaudit.preflight(frame, target=TARGET, config=discaudit.Config(severity={"outliers": "off"}), random_state=0)
    assert "outliers" not in plottable(v)
    assert "normality" in plottable(v)  # its Q-Q distances are its own, not the outlier check's
    fig = v.plot("outliers")
    assert "did not run" in " ".join(t.get_text() for t in fig.axes[0].texts)


def test_clear_import_error_without_matplotlib(demo, monkeypatch):
    real_import = builtins.__import__

    def no_matplotlib(name, *args, **kwargs):
        if name == "matplotlib" or name.startswith("matplotlib."):
            raise ImportError(f"No module named {name!r}")
        return real_import(name, *args, **kwargs)

    monkeypatch.setattr(builtins, "__import__", no_matplotlib)
    with pytest.raises(ImportError, match=r"pip install 'discaudit\[plot\]'"):
        demo.plot("outliers")
    with pytest.raises(ImportError, match="matplotlib"):
        demo.plot()


# --- layout: nothing drawn over the data ---------------------------------------------------------


def _renderer(fig):
    from matplotlib.backends.backend_agg import FigureCanvasAgg

    canvas = FigureCanvasAgg(fig)
    canvas.draw()
    return canvas.get_renderer()


@pytest.mark.parametrize(
    "check", ["outliers", "normality", "collinearity", "scale_disparity", "covariance_homogeneity"]
)
def test_legends_sit_outside_the_axes(demo, check):
    fig = plot_verdict(demo, check)
    renderer = _renderer(fig)
    for ax in fig.axes:
        legend = ax.get_legend()
        if legend is None:
            continue
        box, frame = legend.get_window_extent(renderer), ax.get_window_extent(renderer)
        assert box.x0 >= frame.x1 or box.y1 <= frame.y0, (check, ax.get_title(loc="left"))
    # and no boxed note inside any axes
    assert not [
        t
        for ax in fig.axes
        for t in ax.texts
        if t.get_bbox_patch() is not None and "flag-label" not in (t.get_gid() or "")
    ]


@pytest.mark.parametrize("data", ["demo", "breast_cancer", "digits"])
def test_flagged_row_labels_do_not_overlap(demo, data):
    # the demo, and two open data sets with many flagged rows (digits: ten classes on one panel)
    from matplotlib.text import Text
    from sklearn.datasets import load_breast_cancer, load_digits

    if data == "demo":
        verdict = demo
    else:
        X, y = (load_breast_cancer if data == "breast_cancer" else load_digits)(return_X_y=True)
        verdict = discaudit.preflight(X, y, random_state=0)
    fig = plot_verdict(verdict, "outliers")
    renderer = _renderer(fig)
    labelled = 0
    for ax in fig.axes:
        boxes = [Text.get_window_extent(t, renderer) for t in _gids(ax, "flag-label:")]  # the text, not its leader
        labelled += len(boxes)
        for i, a in enumerate(boxes):
            for b in boxes[i + 1 :]:
                assert not a.overlaps(b), ax.get_title(loc="left")
    assert labelled >= 5


def test_class_panels_share_one_scale(demo, outlier_figure):
    panels = [ax for ax in outlier_figure.axes if ax.get_title(loc="left").startswith("Outliers in class")]
    assert len(panels) == len(demo.meta["classes"])
    assert len({ax.get_xlim() for ax in panels}) == 1 and len({ax.get_ylim() for ax in panels}) == 1
    qq = _panel(outlier_figure, "chi-square Q-Q")
    assert qq.get_ylim() == panels[0].get_ylim()
    normal = plot_verdict(demo, "normality")
    lims = {(ax.get_xlim(), ax.get_ylim()) for ax in normal.axes if "Normality, class" in ax.get_title(loc="left")}
    assert len(lims) == 1
