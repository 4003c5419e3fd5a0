"""Which candidates the log-loss rules out before the accuracy decides (``expected_performance``).

Properties that must hold for any figures, checked on hand-built paired comparisons, plus the
no-feature log-loss against scipy's entropy and scikit-learn's log-loss (outside references), and
one seeded audit where p is close to N - K so that plain LDA's probabilities collapse.
"""

from __future__ import annotations

import itertools

import numpy as np
import pytest
from scipy.stats import entropy
from sklearn.metrics import log_loss

import discaudit
from discaudit.checks.expected_performance import CANDIDATES, KIND, _no_feature_log_loss, _not_contenders
from discaudit.decision.choose import NAMES
from discaudit.findings import fmt


def _pair(acc: float, acc_se: float, ll: float, ll_se: float) -> dict[str, float]:
    return {"accuracy_difference": acc, "accuracy_se": acc_se, "log_loss_difference": ll, "log_loss_se": ll_se}


def _table(figures: dict[str, tuple[float, float]], se: dict[frozenset[str], tuple[float, float]]):
    """Figures {model: (accuracy, log_loss)} and paired SEs {pair: (accuracy SE, log-loss SE)}."""
    cand = {m: {"accuracy": a, "log_loss": ll} for m, (a, ll) in figures.items()}
    paired: dict[str, dict[str, dict[str, float]]] = {m: {} for m in cand}
    for a, b in itertools.permutations(cand, 2):
        acc_se, ll_se = se[frozenset((a, b))]
        paired[a][b] = _pair(
            cand[a]["accuracy"] - cand[b]["accuracy"], acc_se, cand[a]["log_loss"] - cand[b]["log_loss"], ll_se
        )
    return cand, paired


def _lowest(cand: dict[str, dict[str, float]]) -> str:
    return min(cand, key=lambda m: (cand[m]["log_loss"], CANDIDATES.index(m)))


def test_no_feature_log_loss_is_the_entropy_of_the_class_shares() -> None:
    # References: scipy.stats.entropy (natural log) and scikit-learn's log_loss of a constant
    # prediction of the shares.
    counts = np.array([50, 30, 20])
    assert _no_feature_log_loss(counts) == pytest.approx(entropy(counts / counts.sum()))
    y = np.repeat([0, 1, 2], counts)
    shares = np.tile(counts / counts.sum(), (y.size, 1))
    assert _no_feature_log_loss(counts) == pytest.approx(log_loss(y, shares))


def test_lda_is_not_ruled_out_by_its_own_shrunk_estimate_unless_it_collapsed() -> None:
    # LDA's log-loss exceeds shrinkage LDA's by 4 paired SE at equal accuracy: calibration only.
    se = {frozenset(("lda", "regularized_lda")): (0.01, 0.01)}
    cand, paired = _table({"lda": (0.80, 0.54), "regularized_lda": (0.80, 0.50)}, se)
    assert _not_contenders(list(cand), cand, paired, 1.0, 1.0, np.log(3), _lowest(cand)) == {}
    # The same gap with LDA's log-loss above the no-feature rule's: its probabilities collapsed.
    cand, paired = _table({"lda": (0.80, 1.20), "regularized_lda": (0.80, 1.16)}, se)
    out = _not_contenders(list(cand), cand, paired, 1.0, 1.0, np.log(3), _lowest(cand))
    assert out["lda"]["why"] == "collapsed" and out["lda"]["against"] == "regularized_lda"


@pytest.mark.parametrize(
    ("acc_se", "ll_se", "ruled_out"),
    [
        (0.01, 0.02, False),  # LDA leads by 3 SE of accuracy, trails by 1.5 SE of log-loss: keeps its place
        (0.03, 0.01, True),  # leads by 1 SE, trails by 3 SE: the log-loss is the stronger evidence
    ],
)
def test_across_kinds_the_stronger_evidence_decides(acc_se: float, ll_se: float, ruled_out: bool) -> None:
    se = {frozenset(("lda", "logistic_regression")): (acc_se, ll_se)}
    cand, paired = _table({"lda": (0.83, 0.36), "logistic_regression": (0.80, 0.33)}, se)
    out = _not_contenders(list(cand), cand, paired, 1.0, 1.0, np.log(2), _lowest(cand))
    assert ("lda" in out) is ruled_out
    if ruled_out:
        assert out["lda"] == {
            "against": "logistic_regression",
            "why": "fits worse",
            **paired["lda"]["logistic_regression"],
        }


def test_a_gap_within_the_guard_rules_nothing_out() -> None:
    # Log-loss gaps below one paired SE never rule a candidate out, whatever its kind or level.
    models = list(CANDIDATES)
    se = {frozenset(p): (0.01, 0.5) for p in itertools.combinations(models, 2)}
    cand, paired = _table({m: (0.7, 2.0 + 0.1 * i) for i, m in enumerate(models)}, se)
    assert _not_contenders(models, cand, paired, 1.0, 1.0, np.log(2), _lowest(cand)) == {}


def test_the_lowest_log_loss_stays_and_reasons_are_recorded_on_random_figures() -> None:
    rng = np.random.default_rng(3)
    models = list(CANDIDATES)
    for _ in range(300):
        figures = {m: (float(rng.uniform(0.5, 1.0)), float(rng.uniform(0.05, 1.5))) for m in models}
        se = {
            frozenset(p): (float(rng.uniform(0, 0.05)), float(rng.uniform(0, 0.1)))
            for p in itertools.combinations(models, 2)
        }
        cand, paired = _table(figures, se)
        lowest = _lowest(cand)
        out = _not_contenders(models, cand, paired, 1.0, 1.0, np.log(2), lowest)
        assert lowest not in out
        for c, why in out.items():
            d = paired[c][why["against"]]
            assert d["log_loss_difference"] > d["log_loss_se"]
            if why["why"] == "fits worse":
                assert KIND[c] != KIND[why["against"]]
            else:
                assert cand[c]["log_loss"] > np.log(2)


def test_collapsed_lda_near_n_minus_k_is_never_recommended() -> None:
    # Invented data: two Gaussian classes, 24 rows each, 40 features (N - K = 46): LDA's plug-in
    # probabilities are extreme, so its leave-one-out log-loss exceeds the no-feature rule's.
    rng = np.random.default_rng(21)
    p, n = 40, 24
    X = np.vstack([rng.normal(size=(n, p)), rng.normal(size=(n, p)) + 0.5])
    y = np.repeat(["a", "b"], n)
    v = discaudit.preflight(X, y, random_state=0)
    d = v.findings["expected_performance"].details
    lda = d["candidates"]["lda"]
    assert lda["log_loss"] > d["no_feature_log_loss"]
    assert d["not_contenders"]["lda"]["why"] == "collapsed"
    assert v.recommendation.model != "lda"
    # The alternatives cite the figures of every ruled-out candidate, and any reason about one does too.
    alternatives = {a["model"]: a["reason"] for a in v.recommendation.alternatives}
    for c, why in d["not_contenders"].items():
        if c == v.recommendation.model:
            continue
        cited = (fmt(why["log_loss_difference"], 2), fmt(why["log_loss_se"], 2), NAMES[why["against"]])
        assert all(x in alternatives[c] for x in cited), alternatives[c]
        for sentence in v.recommendation.reasons:
            if sentence.startswith(f"{NAMES[c][:1].upper()}{NAMES[c][1:]} is predicted at"):
                assert all(x in sentence for x in cited), sentence
