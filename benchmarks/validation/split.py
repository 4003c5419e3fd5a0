"""The fixed split of whole families (and open data sets) into ``tuning`` and ``held_out``.

A decision rule may be designed, tuned and debugged on the ``tuning`` families and open data
sets only. The ``held_out`` ones measure how the recommendation generalizes to kinds of data
it was not tuned on; their report is written only by an explicit ``study.py --split held_out``
(or ``--split all``), and each such report adds one to the look counter at the top of
``RESULTS.md``.

How the split was made (once, before any result of the new design was read):

* Families: every family kept from the earlier design of the study (``Family.kept``: its
  territory had been seen while the earlier rules were tuned) goes to ``tuning``. In a
  category that has no kept family, the new family whose name has the smallest SHA-256
  digest also goes to ``tuning``, so that every category has families on both sides. Every
  other new family is ``held_out``. ``derive_family_split()`` re-derives this.
* Open data sets: the three that the earlier study had never scored (pingouin's penguins,
  heart disease and drug-trial data sets) are ``held_out``. Of the eight the earlier study
  had scored, the four with the smallest SHA-256 digest of their name are ``tuning`` and the
  other four ``held_out``; these four are marked as *looked at before* in the held-out
  report, which also gives the figures without them.

Before the split was used, the held-out generators were checked once for difficulty only (the
best candidate's and the trivial rule's accuracy, not which model won) and five had their
ranges revised (see README.md).

The constants below are the record. They are never to be changed after results are read:
a new family or data set goes to ``held_out`` unless it is added to ``tuning`` before any
result for it has been looked at, and that is noted here.
"""

from __future__ import annotations

import hashlib

SEEDS = (0, 1, 2, 3)

FAMILY_SPLIT: dict[str, tuple[str, ...]] = {
    "tuning": (
        # kept from the earlier design
        "tidy_pair_small",
        "tidy_trio",
        "tidy_pair_huge",
        "factor_signal_quiet",
        "factor_signal_loud",
        "lopsided_spread",
        "spread_pair_medium",
        "same_centre_spread",
        "heavy_tails_wild",
        "likert_scores",
        "tidy_six",
        "lopsided_pair",
        "scattered_outliers",
        "crowded_pair",
        "wide_moderate",
        "skewed_lognormal",
        "split_class",
        "near_separable",
        "wild_scales",
        # new, smallest digest in a category without a kept family
        "turned_few_rows",
        "scaled_trio",
        "logit_lognormal",
    ),
    "held_out": (
        "equal_varied",
        "equal_correlated_large",
        "equal_modest_rows",
        "quiet_few_rows",
        "quiet_chain_trio",
        "small_class_scaled",
        "small_class_trio",
        "small_class_elongated",
        "turned_pair",
        "turned_trio",
        "scaled_pair",
        "scaled_few_rows",
        "spread_varied",
        "spread_many_rows",
        "heavy_tails_varied",
        "heavy_tails_spread",
        "heavy_tails_few_rows",
        "ordinal_binary_mix",
        "binary_sparse",
        "count_mix",
        "many_small_classes",
        "many_classes_spread",
        "many_classes_few_features",
        "rare_class_pair",
        "rare_classes_multi",
        "rare_class_faint",
        "contaminated_varied",
        "contaminated_spread",
        "contaminated_cluster",
        "ratio_sweep_equal",
        "ratio_sweep_spread",
        "logit_gamma",
        "logit_clusters",
        "cluster_classes",
        "separable_varied",
    ),
}

OPEN_SPLIT: dict[str, tuple[str, ...]] = {
    "tuning": ("iris", "wine", "spector_grade", "modechoice_mode"),
    "held_out": (
        "breast_cancer",
        "digits",
        "anes96_vote",
        "fair_affair",
        "penguins_species",
        "heart_disease",
        "drug_trial_condition",
    ),
}

# Open data sets the earlier study had already scored (and printed), hence not new ground.
OPEN_SEEN_BEFORE: tuple[str, ...] = (
    "iris",
    "wine",
    "breast_cancer",
    "digits",
    "anes96_vote",
    "fair_affair",
    "spector_grade",
    "modechoice_mode",
)

SPLITS = ("tuning", "held_out")


def _digest(name: str) -> str:
    return hashlib.sha256(name.encode()).hexdigest()


def split_of(name: str) -> str:
    """``"tuning"`` or ``"held_out"`` for a family or open data set name."""
    for table in (FAMILY_SPLIT, OPEN_SPLIT):
        for side, names in table.items():
            if name in names:
                return side
    raise KeyError(f"{name!r} is in no split (add it to split.py before reading any result for it)")


def derive_family_split(families) -> dict[str, tuple[str, ...]]:
    """Re-derive the family split from ``Family.kept`` and ``Family.category`` (see the module doc)."""
    tuning = [f.name for f in families if f.kept]
    categories = sorted({f.category for f in families})
    for c in categories:
        members = [f for f in families if f.category == c]
        if not any(f.kept for f in members):
            tuning.append(min((f.name for f in members), key=_digest))
    return {
        "tuning": tuple(tuning),
        "held_out": tuple(f.name for f in families if f.name not in tuning),
    }


def derive_open_split(names, seen_before=OPEN_SEEN_BEFORE) -> dict[str, tuple[str, ...]]:
    """Re-derive the open-data split (see the module doc)."""
    seen = sorted((n for n in names if n in seen_before), key=_digest)
    tuning = seen[: len(seen) // 2]
    return {"tuning": tuple(n for n in names if n in tuning), "held_out": tuple(n for n in names if n not in tuning)}


def check(families, open_names) -> None:
    """Raise if the recorded split does not cover exactly the families and data sets, or
    disagrees with its derivation (catches a family added without a decision)."""
    names = [f.name for f in families]
    recorded = set(FAMILY_SPLIT["tuning"]) | set(FAMILY_SPLIT["held_out"])
    if set(names) != recorded or set(FAMILY_SPLIT["tuning"]) & set(FAMILY_SPLIT["held_out"]):
        raise RuntimeError(f"FAMILY_SPLIT does not match the families: {sorted(set(names) ^ recorded)}")
    if set(open_names) != set(OPEN_SPLIT["tuning"]) | set(OPEN_SPLIT["held_out"]):
        raise RuntimeError("OPEN_SPLIT does not match the open data sets")
    by_cat: dict[str, set[str]] = {}
    for f in families:
        by_cat.setdefault(f.category, set()).add(split_of(f.name))
    derived = derive_family_split(families)
    if {k: set(v) for k, v in derived.items()} != {k: set(v) for k, v in FAMILY_SPLIT.items()}:
        raise RuntimeError("FAMILY_SPLIT differs from its derivation: record the decision in split.py")
    derived_open = derive_open_split(list(open_names))
    if {k: set(v) for k, v in derived_open.items()} != {k: set(v) for k, v in OPEN_SPLIT.items()}:
        raise RuntimeError("OPEN_SPLIT differs from its derivation: record the decision in split.py")
    one_sided = sorted(c for c, sides in by_cat.items() if sides != {"tuning", "held_out"})
    if one_sided:
        raise RuntimeError(f"categories with families on one side only: {one_sided}")
