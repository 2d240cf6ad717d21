"""Other Python environments: virtual environments with other versions of an estimator library.

``forecastaudit environment create NAME PACKAGE==VERSION ...`` (or
:func:`create_environment`) builds a virtual environment with :mod:`venv` and pip in the
environments folder, installs the requirements there, and writes what pip installed to
``environment.json`` beside it. An audit then runs estimators inside it
(``audit(..., environments={NAME: [...]})``) through
:mod:`forecastaudit.adapters.other_environment`, one subprocess per fit, so that one audit
shows two versions of one library side by side.

The environments folder is ``$FORECASTAUDIT_ENVIRONMENTS`` when set, otherwise
``forecastaudit/environments`` under ``$XDG_DATA_HOME`` (``~/.local/share`` by default).
An environment is built in a temporary folder beside its final place and moved there only
once pip has finished, so a failed build leaves nothing behind.
"""

from __future__ import annotations

import datetime as _dt
import json
import os
import re
import shutil
import subprocess
import sys
import tempfile
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

from forecastaudit.errors import EnvironmentSetupError
from forecastaudit.files import write_text_atomic

__all__ = [
    "EnvironmentInfo",
    "create_environment",
    "environments_folder",
    "get_environment",
    "list_environments",
]

#: The file an environment's description is kept in, inside its folder.
DESCRIPTION = "environment.json"
#: The kind marker of that file.
KIND = "forecastaudit-environment"
_NAME = re.compile(r"^[a-z0-9][a-z0-9._-]{0,39}$")


def environments_folder(folder: str | os.PathLike[str] | None = None) -> Path:
    """The folder environments live in (see the module docstring)."""
    if folder is not None:
        return Path(folder)
    configured = os.environ.get("FORECASTAUDIT_ENVIRONMENTS")
    if configured:
        return Path(configured)
    base = os.environ.get("XDG_DATA_HOME") or str(Path.home() / ".local" / "share")
    return Path(base) / "forecastaudit" / "environments"


@dataclass(frozen=True)
class EnvironmentInfo:
    """One environment: where it is and what it holds.

    Attributes
    ----------
    name : str
    path : Path
        Its folder.
    python : str
        The interpreter's version.
    requested : list of str
        The requirements it was created with.
    installed : dict of str to str
        Every distribution pip installed, with its version (names lower case).
    created : str
        When it was created (UTC, ISO 8601).
    """

    name: str
    path: Path
    python: str
    requested: list[str] = field(default_factory=list)
    installed: dict[str, str] = field(default_factory=dict)
    created: str = ""

    @property
    def interpreter(self) -> Path:
        """Its Python interpreter."""
        if os.name == "nt":  # pragma: no cover - the layout of venv on Windows
            return self.path / "Scripts" / "python.exe"
        return self.path / "bin" / "python"

    def version_of(self, package: str) -> str | None:
        """The installed version of a distribution, or None."""
        return self.installed.get(_normal(package))

    def to_dict(self) -> dict[str, Any]:
        """The content of its ``environment.json``."""
        return {
            "kind": KIND,
            "name": self.name,
            "python": self.python,
            "requested": list(self.requested),
            "installed": dict(sorted(self.installed.items())),
            "created": self.created,
        }


def _normal(name: str) -> str:
    return re.sub(r"[-_.]+", "-", name).lower()


def _check_name(name: Any) -> str:
    if not isinstance(name, str) or not _NAME.match(name):
        raise EnvironmentSetupError(
            f"An environment name is 1 to 40 lower-case letters, digits, '.', '_' or '-', "
            f"starting with a letter or digit; got {name!r}. E.g. 'statsmodels-0.14'."
        )
    return name


def _check_requirement(text: Any) -> str:
    if not isinstance(text, str) or not re.match(r"^[A-Za-z0-9][A-Za-z0-9._\-\[\],]*", text):
        raise EnvironmentSetupError(
            f"{text!r} is not a requirement pip understands; write PACKAGE==VERSION, e.g. "
            "statsmodels==0.14.1."
        )
    if text.startswith("-") or any(c in text for c in " ;|&$`"):
        raise EnvironmentSetupError(
            f"{text!r}: give plain requirements (PACKAGE==VERSION), not pip options."
        )
    return text


def _run(command: list[str], what: str, timeout: float) -> str:
    try:
        done = subprocess.run(command, capture_output=True, text=True, timeout=timeout, check=False)
    except subprocess.TimeoutExpired:
        raise EnvironmentSetupError(
            f"{what} took longer than {timeout:g} s and was stopped."
        ) from None
    except OSError as exc:
        raise EnvironmentSetupError(f"{what} could not start: {exc}") from exc
    if done.returncode != 0:
        tail = (done.stderr or done.stdout).strip()[-3000:]
        raise EnvironmentSetupError(f"{what} failed (exit {done.returncode}):\n{tail}")
    return done.stdout


def create_environment(
    name: str,
    requirements: list[str],
    *,
    folder: str | os.PathLike[str] | None = None,
    replace: bool = False,
    python: str | os.PathLike[str] | None = None,
    timeout: float = 1800.0,
) -> EnvironmentInfo:
    """Build a virtual environment with ``requirements`` and record what it installed.

    Parameters
    ----------
    name : str
        Its name (lower-case letters, digits, ``.``, ``_``, ``-``).
    requirements : list of str
        What pip installs, e.g. ``["statsmodels==0.14.1", "numpy<2"]``.
    folder : path, optional
        The environments folder (default: :func:`environments_folder`).
    replace : bool
        Replace an environment of that name (default: refuse).
    python : path, optional
        The interpreter the environment is built from (default: this one's base
        interpreter).
    timeout : float
        Seconds pip may take.

    Returns
    -------
    EnvironmentInfo

    Raises
    ------
    EnvironmentSetupError
        A bad name or requirement, an existing environment, or a failed venv or pip run
        (with pip's own message); nothing is left behind.
    """
    name = _check_name(name)
    if not requirements:
        raise EnvironmentSetupError(
            "Give at least one requirement, e.g. 'forecastaudit environment create "
            'statsmodels-0.14 statsmodels==0.14.1 "numpy<2"\'.'
        )
    wanted = [_check_requirement(r) for r in requirements]
    root = environments_folder(folder)
    target = root / name
    if target.exists() and not replace:
        raise EnvironmentSetupError(
            f"An environment {name!r} exists already at {target}; choose another name, or "
            "replace it (replace=True, or --replace on the command line)."
        )
    root.mkdir(parents=True, exist_ok=True)
    build = Path(tempfile.mkdtemp(prefix=f".{name}.", suffix=".partial", dir=root))
    try:
        base = str(python or getattr(sys, "_base_executable", sys.executable))
        _run([base, "-m", "venv", str(build)], f"Creating the virtual environment {name}", 300)
        info = EnvironmentInfo(name=name, path=build, python="")
        interpreter = str(info.interpreter)
        _run(
            [
                interpreter,
                "-m",
                "pip",
                "install",
                "--disable-pip-version-check",
                "--no-input",
                "--only-binary",
                ":all:",
                *wanted,
            ],
            f"pip install {' '.join(wanted)} into {name}",
            timeout,
        )
        listed = json.loads(
            _run(
                [interpreter, "-m", "pip", "list", "--format=json", "--disable-pip-version-check"],
                f"Listing what pip installed into {name}",
                120,
            )
        )
        version = _run(
            [interpreter, "-c", "import platform; print(platform.python_version())"],
            f"Asking {name}'s interpreter its version",
            60,
        ).strip()
        installed = {_normal(item["name"]): str(item["version"]) for item in listed}
        if target.exists():
            shutil.rmtree(target)
        build.rename(target)
    except BaseException:
        shutil.rmtree(build, ignore_errors=True)
        raise
    info = EnvironmentInfo(
        name=name,
        path=target,
        python=version,
        requested=wanted,
        installed=installed,
        created=_dt.datetime.now(_dt.UTC).replace(microsecond=0).isoformat(),
    )
    write_text_atomic(target / DESCRIPTION, json.dumps(info.to_dict(), indent=2) + "\n")
    return info


def _read(path: Path) -> EnvironmentInfo:
    try:
        data = json.loads((path / DESCRIPTION).read_text(encoding="utf-8"))
    except (OSError, ValueError) as exc:
        raise EnvironmentSetupError(
            f"{path} has no readable {DESCRIPTION} ({exc}); it was not made by 'forecastaudit "
            "environment create'. Create the environment again."
        ) from None
    if not isinstance(data, dict) or data.get("kind") != KIND:
        raise EnvironmentSetupError(f"{path / DESCRIPTION} is not a forecastaudit environment.")
    return EnvironmentInfo(
        name=str(data["name"]),
        path=path,
        python=str(data.get("python", "")),
        requested=list(data.get("requested", [])),
        installed={str(k): str(v) for k, v in data.get("installed", {}).items()},
        created=str(data.get("created", "")),
    )


def list_environments(folder: str | os.PathLike[str] | None = None) -> list[EnvironmentInfo]:
    """Every environment in the folder, by name (folders that are not one are skipped)."""
    root = environments_folder(folder)
    if not root.is_dir():
        return []
    found = []
    for path in sorted(root.iterdir()):
        if path.is_dir() and not path.name.startswith(".") and (path / DESCRIPTION).is_file():
            try:
                found.append(_read(path))
            except EnvironmentSetupError:
                continue
    return found


def get_environment(name: str, folder: str | os.PathLike[str] | None = None) -> EnvironmentInfo:
    """The environment of that name.

    Raises
    ------
    EnvironmentSetupError
        When there is none, listing those there are.
    """
    root = environments_folder(folder)
    path = root / _check_name(name)
    if not (path / DESCRIPTION).is_file():
        known = ", ".join(e.name for e in list_environments(folder)) or "none"
        raise EnvironmentSetupError(
            f"No environment {name!r} in {root} (environments there: {known}). Create it with "
            f"'forecastaudit environment create {name} PACKAGE==VERSION ...'."
        )
    return _read(path)
