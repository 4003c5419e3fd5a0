"""The one way an audit derives its random streams: the audit's seed, a named salt, and a key.

Every random step draws from ``numpy.random.SeedSequence([seed mod 2**32, salt, *key])``, so the
same seed always gives the same verdict, and different steps (salts) and classes or chunks
(keys) get independent streams. ``None`` draws fresh entropy. The salts are named here, once:

==================  ====  ========================================================
salt                value  stream
==================  ====  ========================================================
``CHUNK_SAMPLE``      1   reservoir sample of chunk i (key: i)
``CHUNK_MERGE``       2   merging the running summary with chunk i (key: i)
``PARTITION_MERGE``   3   tree merge of Dask partition summaries (key: level, pair)
``OUTLIERS``          3   robust fit of each class (spawned per class)
``NORMALITY``         4   normality subsamples of each class (spawned per class)
``LABEL_UNIFY``       7   merging classes whose labels arrived as text and as numbers
``LOGISTIC_CV``       8   row keys of the logistic subsample and folds (no key)
``PERFORMANCE_ROWS``  9   row keys of the rows scored by leave-one-out on large inputs
``ENGINE_SAMPLE``    10   the hash seed of a per-class sample drawn inside an engine (no key)
``CANONICAL``        11   content keys of the canonical row and class order (seed fixed at 0)
``WHAT_IF_SAMPLE``    12  row keys of the rows a what-if keeps per class when it caps them (no key)
``ROW_CONTENT``       13  column constants of the seed-free row content hash (seed fixed at 0)
==================  ====  ========================================================

``PARTITION_MERGE`` and ``OUTLIERS`` share a value but never a stream: the first always carries
a two-part key, the second is spawned (SeedSequence streams differ by their whole entropy).
The values are kept as they were when verdicts were first published, so old seeds reproduce.
"""

from __future__ import annotations

from collections.abc import Sequence

import numpy as np

CHUNK_SAMPLE = 1
CHUNK_MERGE = 2
PARTITION_MERGE = 3
OUTLIERS = 3
NORMALITY = 4
LABEL_UNIFY = 7
LOGISTIC_CV = 8
PERFORMANCE_ROWS = 9
ENGINE_SAMPLE = 10
CANONICAL = 11
WHAT_IF_SAMPLE = 12
ROW_CONTENT = 13


def _entropy(random_state: int | None, salt: int, key: tuple[int, ...]) -> list[int] | None:
    return None if random_state is None else [int(random_state) % 2**32, salt, *key]


def stream_rng(random_state: int | None, salt: int, *key: int) -> np.random.Generator:
    """A generator for one random step: ``salt`` names the step, ``key`` the chunk or pair."""
    return np.random.default_rng(np.random.SeedSequence(_entropy(random_state, salt, key)))


def class_seeds(random_state: int | None, n_classes: int, salt: int, ranks: Sequence[int] | None = None) -> list[int]:
    """One integer seed per class for the step named by ``salt`` (``SeedSequence`` spawning).

    ``ranks`` gives each class's place in a canonical order that does not depend on the class
    labels (:func:`discaudit.stats.canonical.canonical_ranks`): class k gets the seed of child
    ``ranks[k]``, so renaming or reordering the labels hands every class the same seed. Without
    it the seeds follow the class codes.
    """
    base = np.random.SeedSequence(_entropy(random_state, salt, ()))
    children = [int(child.generate_state(1)[0]) for child in base.spawn(n_classes)]
    if ranks is None:
        return children
    if sorted(ranks) != list(range(n_classes)):
        raise ValueError(f"ranks must be a permutation of 0..{n_classes - 1}; got {list(ranks)}")
    return [children[r] for r in ranks]
