"""discaudit: a pre-flight audit of a labelled data set before fitting a discriminant classifier.

>>> import discaudit
>>> verdict = discaudit.preflight(df, target="label")   # doctest: +SKIP
>>> print(verdict)                                      # doctest: +SKIP

The public names load on first use (PEP 562), so ``import discaudit`` alone is cheap and the
command line can catch Ctrl-C while numpy, scipy and pandas load.
"""

from __future__ import annotations

from discaudit._version import __version__

TYPE_CHECKING = False  # not typing's: importing typing here would widen the window of a bare Ctrl-C
if TYPE_CHECKING:
    from typing import Any

    from discaudit import stats
    from discaudit.audit import preflight
    from discaudit.config import Config
    from discaudit.errors import DataError
    from discaudit.findings import Finding
    from discaudit.verdict import Recommendation, Verdict

__all__ = ["Config", "DataError", "Finding", "Recommendation", "Verdict", "__version__", "preflight", "stats"]

#: Public name -> the module that defines it.
_WHERE = {
    "preflight": "discaudit.audit",
    "Config": "discaudit.config",
    "DataError": "discaudit.errors",
    "Finding": "discaudit.findings",
    "Recommendation": "discaudit.verdict",
    "Verdict": "discaudit.verdict",
}


def __getattr__(name: str) -> Any:
    import importlib

    if name == "stats":
        return importlib.import_module("discaudit.stats")
    if name in _WHERE:
        value = getattr(importlib.import_module(_WHERE[name]), name)
        globals()[name] = value
        return value
    raise AttributeError(f"module 'discaudit' has no attribute {name!r}")


def __dir__() -> list[str]:
    return sorted(__all__)
