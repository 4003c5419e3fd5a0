"""Invented, seeded data for the engine equivalence tests (property tests: the same rows through
every engine must give what pandas input gives)."""

from __future__ import annotations

import numpy as np
import pandas as pd

import discaudit
from discaudit.config import Config
from discaudit.sources import open_source

#: Figures of the closed-form checks, computed from the moments alone.
MOMENT_CHECKS = ("data_hygiene", "sample_size", "scale_disparity", "covariance_homogeneity", "discriminant_signal")


def offset_frame(n_per_class: int = 150, seed: int = 3) -> pd.DataFrame:
    """Three classes; a column offset by 1e9 (the cancellation trap of raw sums of products), columns
    scaled by 1e-7 and 1e7, an integer column with few values, a constant and a duplicated column,
    and a few planted outlying rows."""
    rng = np.random.default_rng(seed)
    parts = []
    for k, shift in enumerate((0.0, 1.0, 2.5)):
        z = rng.normal(size=(n_per_class, 4)) @ np.array(
            [[1.0, 0.3, 0.0, 0.1], [0.0, 1.0, 0.4, 0.0], [0.0, 0.0, 1.0, 0.2], [0.0, 0.0, 0.0, 1.0]]
        )
        z[:, 0] += shift
        parts.append(
            pd.DataFrame(
                {
                    "offset": 1e9 + z[:, 0],
                    "tiny": 1e-7 * (z[:, 1] + 0.5 * shift),
                    "huge": 1e7 * z[:, 2],
                    "plain": z[:, 3] - shift,
                    "level": rng.integers(0, 3, n_per_class),
                    "label": f"class_{k}",
                }
            )
        )
    frame = pd.concat(parts, ignore_index=True)
    frame["constant"] = 4.0
    frame["copy_of_plain"] = frame["plain"]
    planted = [7, n_per_class + 40, 2 * n_per_class + 33]
    frame.loc[planted, "plain"] += [9.0, -11.0, 12.0]
    frame.loc[planted, "copy_of_plain"] = frame.loc[planted, "plain"]
    return frame.sample(frac=1.0, random_state=1).reset_index(drop=True)


def moments(X, target: str = "label", config: Config | None = None):
    return open_source(X, target=target, config=config or Config(), random_state=0).moments


def assert_same_moments(got, want, rel: float = 1e-9) -> None:
    """Means and scatter matrices agree to ``rel`` relative (of each entry's own scale)."""
    assert got.classes == want.classes
    np.testing.assert_array_equal(got.counts, want.counts)
    np.testing.assert_allclose(got.means, want.means, rtol=rel, atol=0)
    scale = np.sqrt(np.abs(np.einsum("kii->ki", want.scatter)))  # entry (i, j) is at most s_i s_j
    bound = rel * scale[:, :, None] * scale[:, None, :]
    assert np.all(np.abs(got.scatter - want.scatter) <= bound), np.max(np.abs(got.scatter - want.scatter) / bound)


def close(a, b, rel: float) -> None:
    if isinstance(a, dict):
        assert a.keys() == b.keys()
        for k in a:
            close(a[k], b[k], rel)
    elif isinstance(a, list):
        assert len(a) == len(b)
        for x, z in zip(a, b):
            close(x, z, rel)
    elif isinstance(a, float) and isinstance(b, float):
        assert a == b or abs(a - b) <= rel * max(abs(a), abs(b)) + 1e-300 or (np.isnan(a) and np.isnan(b)), (a, b)
    else:
        assert a == b


def assert_same_verdict(got: discaudit.Verdict, want: discaudit.Verdict, rel: float = 1e-9) -> None:
    """Same statuses, recommendation and flagged rows; moment-based figures to ``rel``."""
    assert {k: f.status for k, f in got.findings.items()} == {k: f.status for k, f in want.findings.items()}
    assert got.recommendation.model == want.recommendation.model
    assert got.recommendation.params == want.recommendation.params
    assert sorted(map(str, got.outlier_rows().index)) == sorted(map(str, want.outlier_rows().index))
    for key in MOMENT_CHECKS:
        ignore = ("n_rows_input", "sample_note", "condition_number_raw")
        close(
            {k: v for k, v in got.findings[key].details.items() if k not in ignore},
            {k: v for k, v in want.findings[key].details.items() if k not in ignore},
            rel,
        )
    close_condition_numbers(*(v.findings["scale_disparity"].details["condition_number_raw"] for v in (got, want)))


def close_condition_numbers(a: float | None, b: float | None, rel: float = 1e-9) -> None:
    """Two raw condition numbers kappa agree up to ``rel`` plus their own sensitivity.

    Kappa is itself ill-conditioned: a relative perturbation e of the covariance moves it by up to about
    2 kappa e (Golub & Van Loan 2013, Matrix Computations, 4th ed., sec. 2.6), and the engines sum in
    another order (e near 1e-15); allowed is ``rel`` plus that bound at e = 1e-14.
    """
    if a is None or b is None:
        assert a is b, (a, b)
        return
    kappa = max(abs(a), abs(b))
    assert abs(a - b) <= (rel + 2 * kappa * 1e-14) * kappa, (a, b)
