"""discaudit: a pre-flight audit of a labelled data set before fitting a discriminant classifier.

>>> import discaudit
>>> verdict = discaudit.preflight(df, target="label")   # doctest: +SKIP
>>> print(verdict)                                      # doctest: +SKIP
"""

from discaudit import stats
from discaudit._version import __version__
from discaudit.audit import preflight
from discaudit.config import Config
from discaudit.errors import DataError
from discaudit.findings import Finding
from discaudit.verdict import Recommendation, Verdict

__all__ = ["Config", "DataError", "Finding", "Recommendation", "Verdict", "__version__", "preflight", "stats"]
