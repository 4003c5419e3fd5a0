"""Settings from a TOML file: ``[tool.discaudit]`` in pyproject.toml, or a file given by ``--config``.

Where the settings come from
----------------------------
* ``--config FILE``: that file only. A file with a ``[tool.discaudit]`` table (a
  pyproject.toml) uses that table; any other TOML file holds the keys at its top level.
* otherwise the nearest ``pyproject.toml`` found from the current directory upward. The
  search stops at the first pyproject.toml (the project root): a file found there, in the
  current directory or a parent, applies only when it has a ``[tool.discaudit]`` table;
  otherwise the defaults apply (and a pyproject.toml further up is not read). The command
  line prints which file it used, or "defaults" and why (:attr:`FileSettings.source`).

Keys
----
Every :class:`discaudit.Config` field (``Config.describe()`` lists them with their defaults
and sources), among them ``model`` (the model the gate judges) and ``fail_on`` (``"warn"`` or
``"fail"``, the gate level), and a ``severity`` table of per-check overrides (``"gate"``,
``"advisory"`` or ``"off"``).
An unknown key or a bad value raises :class:`~discaudit.errors.DataError` naming the file
and the key. Precedence: command-line options > file > defaults.

Example
-------
.. code-block:: toml

    [tool.discaudit]
    fail_on = "fail"
    model = "qda"
    vif_fail = 20
    missing = "drop_rows"

    [tool.discaudit.severity]
    normality = "advisory"
"""

from __future__ import annotations

import dataclasses
import sys
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

from discaudit.config import FAIL_ON_LEVELS, GATE_MODELS, Config
from discaudit.errors import DataError

if sys.version_info >= (3, 11):
    import tomllib
else:  # pragma: no cover - exercised on Python 3.10 only
    import tomli as tomllib

_CONFIG_FIELDS = {f.name: f for f in dataclasses.fields(Config)}
#: Keys a file may hold besides the Config fields.
EXTRA_KEYS: tuple[str, ...] = ()


@dataclass(frozen=True)
class FileSettings:
    """Validated settings read from one file (or none).

    Attributes
    ----------
    path : Path or None
        The file read, or None when no file applied.
    config : dict
        Config field -> value, only the fields the file sets.
    fail_on : str or None
        The file's gate level, if set (also in ``config``).
    note : str
        Why no file applied, when none did.
    """

    path: Path | None = None
    config: dict[str, Any] = field(default_factory=dict)
    fail_on: str | None = None
    note: str = ""

    @property
    def source(self) -> str:
        """Which settings apply, in words: the file (and table) read, or "defaults" and why."""
        if self.path is None:
            return "defaults" + (f" ({self.note})" if self.note else "")
        return f"{self.path}" + (f" {self.note}" if self.note else "")


def find_pyproject(start: Path | None = None) -> Path | None:
    """The nearest pyproject.toml in ``start`` (default: the current directory) or above it."""
    here = (start or Path.cwd()).resolve()
    for folder in (here, *here.parents):
        candidate = folder / "pyproject.toml"
        if candidate.is_file():
            return candidate
    return None


def discover(start: Path | None = None) -> FileSettings:
    """Settings from ``[tool.discaudit]`` of the nearest pyproject.toml, or none."""
    path = find_pyproject(start)
    if path is None:
        return FileSettings(note="no pyproject.toml in the current directory or above it")
    document = _read_toml(path)
    table = document.get("tool", {}).get("discaudit") if isinstance(document.get("tool"), dict) else None
    if table is None:
        return FileSettings(note=f"{path} has no [tool.discaudit] table")
    return dataclasses.replace(_validate(table, path, "[tool.discaudit]"), note="[tool.discaudit]")


def load(path: str | Path) -> FileSettings:
    """Settings from a TOML file given explicitly (``--config FILE``).

    Raises
    ------
    DataError
        When the file is not valid TOML, a pyproject.toml lacks ``[tool.discaudit]``, or a
        key is unknown or has a bad value; the message names the file and the key.
    FileNotFoundError, PermissionError
        When the file cannot be opened.
    """
    path = Path(path)
    document = _read_toml(path)
    tool = document.get("tool")
    if isinstance(tool, dict) and "discaudit" in tool:
        return dataclasses.replace(_validate(tool["discaudit"], path, "[tool.discaudit]"), note="[tool.discaudit]")
    if path.name == "pyproject.toml":
        raise DataError(f"{path}: no [tool.discaudit] table; add one or point --config at a discaudit TOML file.")
    return _validate(document, path, "")


def make_config(settings: FileSettings, overrides: dict[str, Any] | None = None) -> Config:
    """A :class:`Config` from defaults, then the file's values, then ``overrides`` (the command line).

    ``severity`` is merged check by check: an override for one check keeps the file's
    setting of the others.
    """
    values = dict(settings.config)
    for key, value in (overrides or {}).items():
        if value is None:
            continue
        if key == "severity":
            values["severity"] = {**values.get("severity", {}), **value}
        else:
            values[key] = value
    try:
        return Config(**values)
    except DataError as exc:
        where = f"{settings.path}: " if settings.path else ""
        raise DataError(f"{where}{exc}") from None


def _read_toml(path: Path) -> dict[str, Any]:
    with path.open("rb") as handle:
        try:
            table: dict[str, Any] = tomllib.load(handle)  # Any if checked for 3.10 without tomli
            return table
        except tomllib.TOMLDecodeError as exc:
            raise DataError(f"{path}: not valid TOML ({exc}).") from None
        except UnicodeDecodeError:
            raise DataError(f"{path}: not valid TOML (the file is not UTF-8 text).") from None


def _validate(table: Any, path: Path, section: str) -> FileSettings:
    where = f"{path}: {section + ' ' if section else ''}"
    if not isinstance(table, dict):
        raise DataError(f"{where.rstrip()} must be a table of settings; got {type(table).__name__}.")
    known = sorted([*_CONFIG_FIELDS, *EXTRA_KEYS])
    config: dict[str, Any] = {}
    fail_on = None
    for key, value in table.items():
        if key == "fail_on":
            if value not in FAIL_ON_LEVELS:
                raise DataError(f"{where}key 'fail_on' must be one of {list(FAIL_ON_LEVELS)}; got {value!r}.")
            fail_on = value
            config["fail_on"] = value
        elif key == "model":
            if value not in GATE_MODELS:
                raise DataError(f"{where}key 'model' must be one of {list(GATE_MODELS)}; got {value!r}.")
            config["model"] = value
        elif key == "severity":
            if not isinstance(value, dict):
                raise DataError(
                    f"{where}key 'severity' must be a table of check = level, e.g. "
                    f'[tool.discaudit.severity] normality = "advisory"; got {value!r}.'
                )
            config["severity"] = dict(value)
        elif key in _CONFIG_FIELDS:
            config[key] = _checked(key, value, where)
        else:
            raise DataError(f"{where}unknown key {key!r}; known keys are: {', '.join(known)}.")
    # Validate the file's values on their own, so the message blames the file.
    try:
        Config(**config)
    except DataError as exc:
        raise DataError(f"{where}{exc}") from None
    return FileSettings(path, config, fail_on)


def _checked(key: str, value: Any, where: str) -> Any:
    """Type check of one Config field's value (ranges are checked by Config itself)."""
    kind = _CONFIG_FIELDS[key].type
    kind = kind if isinstance(kind, str) else getattr(kind, "__name__", str(kind))
    if kind == "float" and (isinstance(value, bool) or not isinstance(value, (int, float))):
        raise DataError(f"{where}key {key!r} must be a number; got {value!r}.")
    if kind == "int" and (isinstance(value, bool) or not isinstance(value, int)):
        raise DataError(f"{where}key {key!r} must be a whole number; got {value!r}.")
    if kind == "str" and not isinstance(value, str):
        raise DataError(f"{where}key {key!r} must be a string; got {value!r}.")
    return float(value) if kind == "float" else value
