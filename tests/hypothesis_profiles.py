"""Hypothesis profiles and shared data strategies for the property-based (fuzz) tests.

Profiles
--------
``ci`` (default)
    30 examples per test, no deadline, derandomized (the same examples on every run, so the
    gate in ``make test`` is reproducible) and no example database. The four files
    (test_fuzz_preflight, test_fuzz_stats, test_fuzz_cli, test_warnings) together take about
    20-35 s on a 2-core machine (up to a minute when the machine is busy).
``deep``
    600 examples per test, no deadline, fresh random examples on every run, failures kept in
    the local example database (``.hypothesis/``) and replayed first. Use it before a release
    or after touching intake, a statistic or a check. Measured on a busy 2-core machine:
    test_fuzz_preflight about 5-10 minutes, test_fuzz_cli about 5, test_fuzz_stats about 2
    plus 12 for ``test_mcd`` alone (large p), test_warnings audits all ten digits (about a
    minute): roughly 25-30 minutes in all.

Choosing a profile
------------------
Hypothesis's pytest plugin loads ``--hypothesis-profile=NAME`` while pytest configures
itself, which is *before* the test modules (and so this module) are imported. The profile
must therefore be registered earlier: load this module as a plugin with ``-p``::

    python -m pytest -p tests.hypothesis_profiles --hypothesis-profile=deep \
        tests/test_fuzz_preflight.py tests/test_fuzz_stats.py tests/test_fuzz_cli.py

(adding ``-p tests.hypothesis_profiles`` to ``addopts`` in pyproject.toml makes a bare
``--hypothesis-profile=deep`` work). Without ``-p``, the environment variable works too::

    HYPOTHESIS_PROFILE=deep python -m pytest tests/test_fuzz_preflight.py

Without either, importing this module loads ``ci``. A profile chosen on the command line or
in the environment is never overridden. Size limits of the generated data also follow the
profile (:data:`LIMITS`): small shapes under ``ci``, the full ranges of issue 9 under ``deep``.

Strategies
----------
Data are drawn in two layers: hypothesis draws the *structure* (shape, class sizes, the kind
of every column, label type, index type, special values, a seed) so that failures shrink to
a small description, and a seeded numpy generator fills in the bulk values. Every generated
case records the culprits it planted (NaN, infinite, huge or non-numeric columns, classes with
one row, missing labels), so a test can check that a ``DataError`` names them.
"""

from __future__ import annotations

import dataclasses
import os
from dataclasses import dataclass, field
from typing import Any

import numpy as np
import pandas as pd
from hypothesis import HealthCheck, settings
from hypothesis import strategies as st

_SLOW_OK = [HealthCheck.too_slow, HealthCheck.data_too_large, HealthCheck.filter_too_much]

settings.register_profile(
    "ci", max_examples=30, deadline=None, derandomize=True, database=None, suppress_health_check=_SLOW_OK
)
settings.register_profile("deep", max_examples=600, deadline=None, suppress_health_check=_SLOW_OK)

if settings.get_current_profile_name() == "default":
    settings.load_profile(os.environ.get("HYPOTHESIS_PROFILE", "ci"))

PROFILE = settings.get_current_profile_name()


@dataclass(frozen=True)
class Limits:
    """Size ranges of generated data (the ci profile keeps each example cheap)."""

    max_class_rows: int  # rows of the largest ("huge") class
    max_features: int
    max_classes: int = 8


LIMITS = Limits(max_class_rows=300, max_features=60) if PROFILE == "deep" else Limits(max_class_rows=40, max_features=8)

# ----------------------------------------------------------------------------------------
# feature columns

#: Kinds of numeric column that keep an input auditable (finite, below 1e150 in magnitude).
CLEAN_KINDS = (
    "normal",
    "normal",
    "normal",
    "scaled",
    "tiny",
    "zero",
    "constant",
    "duplicate",
    "lincomb",
    "int_codes",
    "bool",
    "few_distinct",
    "class_constant",
    "sparse",
    "outlying",
    "nullable_int",
    "ties",
    "near_duplicate",
)
#: Kinds that make an audit impossible under the default Config (or are set aside by it).
HOSTILE_KINDS = ("nan", "inf", "huge", "categorical", "object_str", "object_mixed")

SPECIAL_VALUES = (0.0, -0.0, 1e-300, -1e-300, 5e-324, 1e150, -1e150, 1e300, np.nan, np.inf, -np.inf)


@dataclass
class Case:
    """One generated audit input and what was planted in it."""

    frame: pd.DataFrame  # the feature columns (plus nothing else)
    labels: list[Any]  # one label per row, in row order (may hold NaN/None)
    codes: np.ndarray  # the class code of each row before NaN labels were planted
    class_labels: list[Any]  # the label of each class code
    nan_columns: set[str] = field(default_factory=set)
    inf_columns: set[str] = field(default_factory=set)
    huge_columns: set[str] = field(default_factory=set)
    non_numeric_columns: set[str] = field(default_factory=set)
    missing_label_rows: int = 0
    duplicate_names: bool = False
    description: dict[str, Any] = field(default_factory=dict)

    def __repr__(self) -> str:
        d = self.description
        return (
            f"Case(n={d['n']}, p={d['p']}, class_sizes={d['class_sizes']}, kinds={d['kinds']}, "
            f"exponent={d['exponent']}, labels={d['label_kind']}, specials={d['specials']}, seed={d['seed']}, "
            f"index={type(self.frame.index).__name__}, columns={list(self.frame.columns)}, "
            f"missing_labels={self.missing_label_rows})"
        )

    def _repr_pretty_(self, printer: Any, cycle: bool) -> None:  # used by hypothesis' reports
        printer.text(repr(self))

    def renamed(self, names: list[str]) -> Case:
        """The same case with the columns renamed by position (culprit sets follow)."""
        old = [str(c) for c in self.frame.columns]
        mapping: dict[str, set[str]] = {}
        for o, new in zip(old, names, strict=True):
            mapping.setdefault(o, set()).add(new)

        def move(cols: set[str]) -> set[str]:
            return set().union(*(mapping[c] for c in cols)) if cols else set()

        frame = self.frame.copy()
        frame.columns = names
        return dataclasses.replace(
            self,
            frame=frame,
            nan_columns=move(self.nan_columns),
            inf_columns=move(self.inf_columns),
            huge_columns=move(self.huge_columns),
            non_numeric_columns=move(self.non_numeric_columns),
            duplicate_names=False,
        )

    @property
    def has_tiny(self) -> bool:
        """A column at scale 1e-300 (or a subnormal value planted)."""
        d = self.description
        return (
            "tiny" in d["kinds"]
            or any(0 < abs(v) < 1e-150 for _, _, v in d["specials"] if np.isfinite(v))
            or (d["exponent"] < -150 and "scaled" in d["kinds"])
        )

    @property
    def max_abs(self) -> float:
        """Largest finite magnitude in the float columns."""
        out = 0.0
        for j in range(self.frame.shape[1]):
            col = self.frame.iloc[:, j]
            if col.dtype.kind == "f":
                v = np.abs(col.to_numpy())
                v = v[np.isfinite(v)]
                out = max(out, float(v.max()) if v.size else 0.0)
        return out

    @property
    def names(self) -> list[str]:
        return [str(c) for c in self.frame.columns]

    @property
    def small_classes(self) -> list[Any]:
        counts = np.bincount(self.codes, minlength=len(self.class_labels))
        return [self.class_labels[k] for k in np.flatnonzero(counts < 2)]

    @property
    def is_clean(self) -> bool:
        """Auditable under the default Config: every planted problem is absent."""
        counts = np.bincount(self.codes, minlength=len(self.class_labels))
        return not (
            self.nan_columns
            or self.inf_columns
            or self.huge_columns
            or self.non_numeric_columns
            or self.missing_label_rows
            or self.duplicate_names
            or len(self.class_labels) < 2
            or counts.min() < 2
        )


def _column(
    kind: str, rng: np.random.Generator, n: int, codes: np.ndarray, done: list[np.ndarray], exponent: int
) -> Any:
    """Values of one column of the given kind (numpy array, or a pandas array for extension dtypes)."""
    if kind == "normal":
        return rng.normal(size=n) * rng.uniform(0.5, 3.0) + rng.normal() * 2
    if kind == "scaled":  # values around 10**exponent, exponent in [-300, 148]
        return rng.normal(size=n) * 10.0**exponent
    if kind == "tiny":
        return rng.uniform(1.0, 9.0, size=n) * 1e-300
    if kind == "zero":
        return np.zeros(n)
    if kind == "constant":
        return np.full(n, float(rng.choice([1.0, -3.5, 1e-300, 1e100])))
    if kind == "duplicate":
        return done[int(rng.integers(len(done)))].copy() if done else rng.normal(size=n)
    if kind == "lincomb":  # an exact linear dependency on earlier integer-valued columns
        if len(done) >= 2:
            a, b = rng.choice(len(done), size=2, replace=False)
            with np.errstate(over="ignore", invalid="ignore"):  # huge columns may give inf/NaN: recorded
                return 2.0 * np.round(done[a]) - 3.0 * np.round(done[b]) + 1.0
        return rng.integers(-5, 5, size=n).astype(np.float64)
    if kind == "int_codes":
        return rng.integers(0, int(rng.integers(2, 7)), size=n)
    if kind == "bool":
        return rng.random(n) < rng.uniform(0.05, 0.95)
    if kind == "few_distinct":
        return rng.choice([0.0, 1.0, 2.5], size=n)
    if kind == "class_constant":  # constant within each class, different between classes
        return (codes * 1.5 + 0.25).astype(np.float64)
    if kind == "sparse":
        out = np.zeros(n)
        out[rng.random(n) < 0.1] = rng.normal(size=1)
        return out
    if kind == "outlying":
        out = rng.normal(size=n)
        out[rng.random(n) < 0.1] = 1e12
        return out
    if kind == "ties":  # most rows share one value that is not a dyadic fraction (0.2, 0.1, ...)
        out = rng.normal(size=n)
        out[rng.random(n) < rng.uniform(0.5, 0.9)] = float(rng.choice([0.2, 0.1, 3.7, -1.3]))
        return out
    if kind == "near_duplicate":  # an earlier column plus noise at 1e-12 of its scale
        if not done:
            return rng.normal(size=n)
        base = done[int(rng.integers(len(done)))]
        with np.errstate(over="ignore", invalid="ignore"):
            return base + 1e-12 * (np.abs(base).max() + 1e-300) * rng.normal(size=n)
    if kind == "nullable_int":  # pandas' nullable integer dtype, no missing values
        return pd.array(rng.integers(-3, 4, size=n), dtype="Int64")
    if kind == "nan":
        out = rng.normal(size=n)
        out[rng.integers(n)] = np.nan
        return out
    if kind == "inf":
        out = rng.normal(size=n)
        out[rng.integers(n)] = rng.choice([np.inf, -np.inf])
        return out
    if kind == "huge":
        return rng.normal(size=n) * 1e300
    if kind == "categorical":
        return pd.Categorical(rng.choice(["lo", "mid", "hi"], size=n))
    if kind == "object_str":
        return np.array([f"v{v}" for v in rng.integers(0, 4, size=n)], dtype=object)
    if kind == "object_mixed":
        return np.array([int(v) if v % 2 else f"s{v}" for v in rng.integers(0, 4, size=n)], dtype=object)
    raise AssertionError(kind)


_NAME_POOL = ("x", "feat", "a b", "col,1", 'q"t', "é", "", "0", "NaN", "label", "Length (cm)")


def _names(draw: Any, p: int, allow_duplicates: bool) -> list[Any]:
    style = draw(st.sampled_from(["plain", "plain", "odd", "int"]))
    if style == "plain":
        names: list[Any] = [f"f{j}" for j in range(p)]
    elif style == "int":
        names = list(range(p))
    else:
        names = [f"{_NAME_POOL[j % len(_NAME_POOL)]}{'' if j < len(_NAME_POOL) else j}" for j in range(p)]
    if allow_duplicates and p >= 2 and draw(st.integers(0, 9)) == 0:
        names[-1] = names[0]
    return names


def _index(draw: Any, n: int, rng: np.random.Generator) -> pd.Index:
    kind = draw(st.sampled_from(["range", "range", "shifted", "reversed", "strings", "duplicated", "dates", "floats"]))
    if kind == "range":
        return pd.RangeIndex(n)
    if kind == "shifted":
        return pd.RangeIndex(1000, 1000 + 3 * n, 3)
    if kind == "reversed":
        return pd.Index(np.arange(n)[::-1] * 7)
    if kind == "strings":
        return pd.Index([f"row{i}" for i in rng.permutation(n)])
    if kind == "duplicated":
        return pd.Index(np.repeat(np.arange((n + 1) // 2), 2)[:n])
    if kind == "dates":
        return pd.date_range("2001-01-01", periods=n, freq="D")
    return pd.Index(np.linspace(-1.0, 1.0, n))


def _label_values(kind: str, K: int) -> list[Any]:
    if kind == "int":
        return [int(k) * 3 - 2 for k in range(K)]
    if kind == "str":
        return [f"class {k}" if k % 3 else f"c{k}" for k in range(K)]
    if kind == "bool":
        return [False, True][:K]
    if kind == "mixed":
        return [k if k % 2 else f"k{k}" for k in range(K)]
    if kind == "float":
        return [0.5 * k for k in range(K)]
    raise AssertionError(kind)


@st.composite
def cases(
    draw: Any,
    *,
    hostile: bool = True,
    min_classes: int = 1,
    max_class_rows: int | None = None,
    max_features: int | None = None,
) -> Case:
    """An audit input: features, labels, index; hostile ones may plant problems.

    ``hostile=False`` draws only inputs that must give a Verdict under the default Config
    (at least two classes of at least two rows, finite numeric features below 1e150, at
    least one feature that varies, no missing label).
    """
    limits = LIMITS
    max_rows = max_class_rows or limits.max_class_rows
    max_p = max_features or limits.max_features
    K = draw(st.integers(max(min_classes, 1 if hostile else 2), limits.max_classes))
    sizes = draw(st.lists(st.one_of(st.integers(2, 3), st.integers(2, max_rows)), min_size=K, max_size=K))
    if hostile and draw(st.integers(0, 4)) == 0:
        sizes[draw(st.integers(0, K - 1))] = 1  # a class with one row
    if sum(sizes) < 2:
        sizes[0] = 2
    n = int(sum(sizes))
    seed = draw(st.integers(0, 2**32 - 1))
    rng = np.random.default_rng(seed)
    codes = np.repeat(np.arange(K), sizes)
    if draw(st.booleans()):
        codes = codes[rng.permutation(n)]

    p = draw(st.integers(1, max_p))
    pool = CLEAN_KINDS + (HOSTILE_KINDS if hostile and draw(st.booleans()) else ())
    kinds = draw(st.lists(st.sampled_from(pool), min_size=p, max_size=p))
    if not hostile or draw(st.integers(0, 3)) == 0:
        kinds[draw(st.integers(0, p - 1))] = "normal"  # at least one feature that varies
    exponent = draw(st.one_of(st.integers(-3, 3), st.integers(-300, 148)))
    names = _names(draw, p, allow_duplicates=hostile)

    columns: list[Any] = []
    done: list[np.ndarray] = []
    planted: dict[str, set[str]] = {"nan": set(), "inf": set(), "huge": set(), "non_numeric": set()}
    for kind, name in zip(kinds, names, strict=True):
        values = _column(kind, rng, n, codes, done, exponent)
        if isinstance(values, np.ndarray) and values.dtype.kind == "f":
            done.append(values)
        if kind in ("categorical", "object_str", "object_mixed"):
            planted["non_numeric"].add(str(name))
        columns.append(values)
    # special values planted in float columns
    specials = draw(st.lists(st.sampled_from(SPECIAL_VALUES if hostile else SPECIAL_VALUES[:7]), max_size=3))
    float_cols = [j for j, c in enumerate(columns) if isinstance(c, np.ndarray) and c.dtype.kind == "f"]
    planted_specials = []
    for value in specials:
        if not float_cols:
            break
        j = float_cols[int(rng.integers(len(float_cols)))]
        i = int(rng.integers(n))
        columns[j] = columns[j].copy()
        columns[j][i] = value
        planted_specials.append((str(names[j]), i, value))
    # what was planted, read off the data (a derived column may inherit inf/NaN/huge values)
    for name, column in zip(names, columns, strict=True):
        if isinstance(column, np.ndarray) and column.dtype.kind == "f":
            finite = np.isfinite(column)
            if np.isnan(column).any():
                planted["nan"].add(str(name))
            if np.isinf(column).any():
                planted["inf"].add(str(name))
            if finite.any() and np.abs(column[finite]).max() > 1e150:
                planted["huge"].add(str(name))

    frame = pd.DataFrame(dict(enumerate(columns)))
    frame.columns = pd.Index(names, dtype=object) if not all(isinstance(c, int) for c in names) else pd.Index(names)
    frame.index = _index(draw, n, rng)

    label_kind = draw(st.sampled_from(["int", "str", "mixed", "float"] + (["bool"] if K <= 2 else [])))
    class_labels = _label_values(label_kind, K)
    labels: list[Any] = [class_labels[c] for c in codes]
    missing = 0
    if hostile and draw(st.integers(0, 7)) == 0:
        rows = rng.choice(n, size=int(rng.integers(1, max(2, n // 4))), replace=False)
        missing_marker = draw(st.sampled_from([None, np.nan, float("nan")]))
        for r in rows:
            labels[int(r)] = missing_marker
        missing = int(rows.size)
    return Case(
        frame=frame,
        labels=labels,
        codes=codes,
        class_labels=class_labels,
        nan_columns=planted["nan"],
        inf_columns=planted["inf"],
        huge_columns=planted["huge"],
        non_numeric_columns=planted["non_numeric"],
        missing_label_rows=missing,
        duplicate_names=len({str(c) for c in names}) < p,
        description={
            "n": n,
            "p": p,
            "class_sizes": sizes,
            "kinds": kinds,
            "exponent": exponent,
            "label_kind": label_kind,
            "specials": planted_specials,
            "seed": seed,
        },
    )


def labels_as(labels: list[Any], form: str, index: pd.Index, kind: str = "object") -> Any:
    """The labels in one of the containers a user may pass."""
    if form == "list":
        return list(labels)
    if form == "array":
        return np.asarray(labels, dtype=object) if kind == "object" else np.asarray(labels)
    if form == "series":
        return pd.Series(labels, index=index, name="label")
    if form == "series_other_index":
        return pd.Series(labels, name="label")  # positional: its index differs from X's
    if form == "categorical":
        return pd.Series(pd.Categorical(labels), index=index, name="label")
    raise AssertionError(form)


def snapshot(obj: Any) -> Any:
    """A deep copy to compare with after a call (pandas objects copied with their index)."""
    if isinstance(obj, (pd.DataFrame, pd.Series)):
        return obj.copy(deep=True)
    if isinstance(obj, np.ndarray):
        return obj.copy()
    import copy

    return copy.deepcopy(obj)


def assert_unchanged(before: Any, after: Any) -> None:
    """Exact equality of an input before and after a call, NaN equal to NaN, dtypes included."""
    assert type(before) is type(after)
    if isinstance(before, pd.DataFrame):
        pd.testing.assert_frame_equal(before, after, check_exact=True)
        assert before.index.equals(after.index) and list(before.columns) == list(after.columns)
    elif isinstance(before, pd.Series):
        pd.testing.assert_series_equal(before, after, check_exact=True)
    elif isinstance(before, np.ndarray):
        assert before.dtype == after.dtype and before.shape == after.shape
        assert pd.DataFrame(before.reshape(before.shape[0], -1)).equals(pd.DataFrame(after.reshape(after.shape[0], -1)))
    else:
        assert before == after or repr(before) == repr(after)
