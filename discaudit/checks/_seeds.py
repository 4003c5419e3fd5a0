"""Independent, reproducible seeds for the random steps of a check."""

from __future__ import annotations

import numpy as np


def class_seeds(random_state: int | None, n_classes: int, salt: int) -> list[int]:
    """One integer seed per class, derived from ``random_state`` and a per-check ``salt``.

    The same ``random_state`` always gives the same seeds (None draws fresh entropy); different checks (salts) and
    classes get independent streams (numpy ``SeedSequence`` spawning).
    """
    entropy = None if random_state is None else [int(random_state) % 2**32, salt]
    base = np.random.SeedSequence(entropy)
    return [int(child.generate_state(1)[0]) for child in base.spawn(n_classes)]
