"""The fixed split of whole families (and open data sets) into ``tuning`` and ``held_out``.

A decision rule may be designed, tuned and debugged on the ``tuning`` families and open data
sets only. The ``held_out`` ones measure how the recommendation generalizes to kinds of data
it was not tuned on; their report is written only by an explicit ``study.py --split held_out``
(or ``--split all``), and each such report adds one to the look counter at the top of
``RESULTS.md``.

How the split was made.

*First batch* (once, before any result of the new design was read):

* Families: every family kept from the earlier design of the study (``Family.kept``: its
  territory had been seen while the earlier rules were tuned) goes to ``tuning``. In a
  category that has no kept family, the first-batch family whose name has the smallest
  SHA-256 digest also goes to ``tuning``, so that every category has families on both sides.
  Every other first-batch family was ``held_out``.
* Open data sets: the three that the earlier study had never scored (pingouin's penguins,
  heart disease and drug-trial data sets) were ``held_out``. Of the eight the earlier study
  had scored, the four with the smallest SHA-256 digest of their name are ``tuning`` and the
  other four were ``held_out``.

Before the split was used, the first-batch held-out generators were checked once for
difficulty only (the best candidate's and the trivial rule's accuracy, not which model won)
and five had their ranges revised (see README.md).

*Retirement after two looks* (2026-12-03): the first batch's held-out families and open data
sets were looked at twice (``RETIRED_LOOKS``) and the misses of the second look were read
case by case. A set that has been read that closely no longer measures generalization, so all
35 of those families and all 7 of those open data sets moved to ``tuning``
(``RETIRED_FAMILIES``, ``RETIRED_OPEN``). Their look history stays on record here and in
``RESULTS.md``.

*Second batch* (written 2026-12-03, after the retirement and before any tuning run or any
audit touched it): ``SECOND_BATCH`` families and ``SECOND_BATCH_OPEN`` open data sets, held
out when written. They were not checked even for difficulty; their truth was computed with
``--truth-only`` (which prints no result) and read first by the held-out look 3.

*Second retirement* (2026-12-03, after look 3): the misses of look 3 were read case by case
(``SECOND_BATCH_LOOKS``), so the second batch no longer measures generalization either; all 28
families and 3 open data sets moved to ``tuning``, exactly as the first batch did. Their look
history stays on record here and in ``RESULTS.md``, their last report in
``RESULTS_HELD_OUT_SECOND_BATCH.md``.

*Third batch* (written 2026-12-03, after the second retirement and before any tuning run or
any audit touched it): ``THIRD_BATCH`` families and ``THIRD_BATCH_OPEN`` open data sets, all
``held_out``. They were not checked even for difficulty; their truth may be computed with
``--truth-only`` but is read only by the held-out look.

The constants below are the record. They are never to be changed after results are read:
a new family or data set goes to ``held_out`` unless it is added to ``tuning`` before any
result for it has been looked at, and that is noted here (``ADDED_TO_TUNING``, empty so far).
``derive_family_split`` and ``derive_open_split`` re-derive the split from these rules and
``check`` stops on any disagreement.
"""

from __future__ import annotations

import hashlib

SEEDS = (0, 1, 2, 3)

#: The first batch's tuning families: kept from the earlier design, then the smallest digest of a
#: category without a kept family.
FIRST_TUNING: tuple[str, ...] = (
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
    "turned_few_rows",
    "scaled_trio",
    "logit_lognormal",
)

#: The first batch's held-out families, looked at twice (``RETIRED_LOOKS``), then moved to tuning.
RETIRED_FAMILIES: tuple[str, ...] = (
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
)

#: The first batch's held-out open data sets, retired with the families.
RETIRED_OPEN: tuple[str, ...] = (
    "breast_cancer",
    "digits",
    "anes96_vote",
    "fair_affair",
    "penguins_species",
    "heart_disease",
    "drug_trial_condition",
)

#: The full looks at the retired held-out set (copied from RESULTS.md when it was retired).
RETIRED_LOOKS: tuple[str, ...] = (
    "2026-12-03 07:02: full held-out look 1 of the first batch (discaudit 0.1.0, commit 795aa01)",
    "2026-12-03 07:07: full held-out look 2 of the first batch (discaudit 0.1.0, commit f8febcf): "
    "89.0% acceptable on informative simulated cases, mean regret 0.36 pp (CV pick 0.28), max 15.79 pp",
    "2026-12-03: the first batch's held-out families and open data sets retired into tuning",
)
RETIRED_ON = "2026-12-03"

#: Families written after the retirement, before any tuning run or audit touched them.
SECOND_BATCH: tuple[str, ...] = (
    "equal_block_sparse",
    "equal_noise_features",
    "quiet_smallest_direction",
    "quiet_factor_multi",
    "small_class_tight",
    "small_class_wide_few",
    "turned_mirror",
    "turned_many",
    "scaled_many",
    "scaled_same_centre",
    "spread_moderate_rows",
    "spread_low_rank",
    "heavy_tails_independent",
    "heavy_tails_scale_mixture",
    "ordinal_unequal",
    "binary_independent_mix",
    "many_classes_wide",
    "many_classes_uneven",
    "rare_class_spread",
    "rare_classes_several",
    "contaminated_few_rows",
    "contaminated_cells",
    "ratio_sweep_factor",
    "ratio_sweep_multi",
    "logit_mixed_types",
    "logit_beta_multi",
    "skewed_opposite",
    "banana_classes",
)

#: Open data sets added with the second batch (bundled with installed packages, never scored).
SECOND_BATCH_OPEN: tuple[str, ...] = ("ccard_ownrent", "tips_time", "ancova_method")

#: The full look at the second batch (copied from RESULTS.md when it was retired into tuning).
SECOND_BATCH_LOOKS: tuple[str, ...] = (
    "2026-12-03 11:56: full held-out look 3, the only look at the second batch (discaudit 0.1.0, commit "
    "c9cbec7): 83.5% acceptable on informative simulated cases, mean regret 0.29 pp (CV pick 0.28), "
    "max 5.84 pp",
    "2026-12-03: the second batch's held-out families and open data sets retired into tuning",
)
SECOND_BATCH_RETIRED_ON = "2026-12-03"

#: Every retired batch: (name, date retired, file holding its last held-out report, its looks).
RETIRED_BATCHES: tuple[tuple[str, str, str, tuple[str, ...]], ...] = (
    ("first", RETIRED_ON, "RESULTS_HELD_OUT_FIRST_BATCH.md", RETIRED_LOOKS),
    ("second", SECOND_BATCH_RETIRED_ON, "RESULTS_HELD_OUT_SECOND_BATCH.md", SECOND_BATCH_LOOKS),
)

#: Families written after the second retirement, before any tuning run or audit touched them.
THIRD_BATCH: tuple[str, ...] = (
    "equal_ar1_moderate",
    "equal_noise_moderate",
    "quiet_near_singular",
    "quiet_compound_symmetry",
    "small_class_sign_flip",
    "small_class_inflated_factor",
    "turned_ar1_pair",
    "turned_axes_swapped",
    "scaled_ar1",
    "scaled_mild_wide",
    "spread_toeplitz_mixed",
    "spread_near_singular_class",
    "heavy_tails_laplace",
    "heavy_tails_unequal_df",
    "binary_unequal_latent",
    "counts_unequal_dispersion",
    "many_classes_below_p",
    "many_classes_grouped",
    "rare_class_wide",
    "rare_class_tails",
    "contaminated_cells_wide",
    "contaminated_sentinel",
    "ratio_sweep_ar1",
    "ratio_sweep_sparse",
    "logit_heavy_features",
    "logit_count_features",
    "xor_mixture",
    "surrounded_class",
)

#: Open data sets added with the third batch (bundled with installed packages, never scored).
THIRD_BATCH_OPEN: tuple[str, ...] = ("grunfeld_firm", "randhie_health", "mixed_anova_group", "mediation_ybin")

#: New families or data sets moved to tuning before any result for them was read (none).
ADDED_TO_TUNING: tuple[str, ...] = ()

FAMILY_SPLIT: dict[str, tuple[str, ...]] = {
    "tuning": FIRST_TUNING + RETIRED_FAMILIES + SECOND_BATCH + tuple(n for n in ADDED_TO_TUNING if n in THIRD_BATCH),
    "held_out": tuple(n for n in THIRD_BATCH if n not in ADDED_TO_TUNING),
}

OPEN_SPLIT: dict[str, tuple[str, ...]] = {
    "tuning": ("iris", "wine", "spector_grade", "modechoice_mode")
    + RETIRED_OPEN
    + SECOND_BATCH_OPEN
    + tuple(n for n in ADDED_TO_TUNING if n in THIRD_BATCH_OPEN),
    "held_out": tuple(n for n in THIRD_BATCH_OPEN if n not in ADDED_TO_TUNING),
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
    """Re-derive the family split from ``Family.kept``, ``Family.category`` and the batches (module doc).

    First batch: the kept families and the smallest digest of each category without a kept family
    are tuning; the rest of the first batch was held out and is now retired into tuning, and so is
    the second batch. Any other family is held out, unless it was moved to tuning before its results were read
    (``ADDED_TO_TUNING``)."""
    first = [f for f in families if f.name in FIRST_TUNING or f.name in RETIRED_FAMILIES]
    tuning = [f.name for f in first if f.kept]
    for c in sorted({f.category for f in first}):
        members = [f for f in first if f.category == c]
        if not any(f.kept for f in members):
            tuning.append(min((f.name for f in members), key=_digest))
    if set(tuning) != set(FIRST_TUNING):
        raise RuntimeError("the first batch's tuning families differ from their derivation")
    tuning += [f.name for f in first if f.name not in tuning]  # retired after two looks
    tuning += [f.name for f in families if f.name in SECOND_BATCH]  # retired after look 3
    tuning += [f.name for f in families if f.name in ADDED_TO_TUNING and f.name not in tuning]
    return {
        "tuning": tuple(tuning),
        "held_out": tuple(f.name for f in families if f.name not in tuning),
    }


def derive_open_split(names, seen_before=OPEN_SEEN_BEFORE) -> dict[str, tuple[str, ...]]:
    """Re-derive the open-data split (module doc): of the data sets scored before, the half with the
    smallest name digest were tuning from the start; the first and second batches' held-out ones are
    retired into tuning; any other data set is held out unless moved to tuning before its results were read."""
    seen = sorted((n for n in names if n in seen_before), key=_digest)
    retired = set(RETIRED_OPEN) | set(SECOND_BATCH_OPEN)
    tuning = set(seen[: len(seen) // 2]) | (retired & set(names)) | (set(ADDED_TO_TUNING) & set(names))
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
