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

An environment whose interpreter is gone or does not start (the Python it was made from was
moved or removed, say) is *broken*: :func:`list_environments` lists it with the reason
(:attr:`EnvironmentInfo.problem`), and :func:`get_environment` (which an audit asked to use
an environment calls before fitting) refuses it, saying how to re-create it.
"""

from __future__ import annotations

import datetime as _dt
import json
import os
import re
import shlex
import shutil
import subprocess
import sys
import tempfile
from dataclasses import dataclass, field, replace
from pathlib import Path
from typing import Any

from forecastaudit.errors import EnvironmentSetupError
from forecastaudit.files import write_text_atomic

__all__ = [
    "EnvironmentInfo",
    "create_environment",
    "describe_environments",
    "environments_folder",
    "get_environment",
    "interpreter_problem",
    "list_environments",
    "recreate_command",
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
    return _default_folder()


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
    problem : str or None
        Why it cannot be used (its interpreter is missing or does not start, or its
        description cannot be read), with the fix; None when it can, or when it was not
        checked (:func:`list_environments` checks every one).
    """

    name: str
    path: Path
    python: str
    requested: list[str] = field(default_factory=list)
    installed: dict[str, str] = field(default_factory=dict)
    created: str = ""
    problem: str | None = None

    @property
    def broken(self) -> bool:
        """Whether it was found unusable (see ``problem``)."""
        return self.problem is not None

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


def _check_folder(root: Path) -> Path:
    """``root`` when it is a folder or not there yet; a file there is refused."""
    if root.exists() and not root.is_dir():
        raise EnvironmentSetupError(
            f"{root} is a file, not an environments folder; give the folder the environments "
            "are in (--folder DIR, or $FORECASTAUDIT_ENVIRONMENTS), or leave it out for the "
            f"default {_default_folder()}."
        )
    return root


def _default_folder() -> Path:
    """The environments folder when neither ``folder`` nor the variable is given."""
    base = os.environ.get("XDG_DATA_HOME") or str(Path.home() / ".local" / "share")
    return Path(base) / "forecastaudit" / "environments"


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
    root = _check_folder(environments_folder(folder))
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
        raise EnvironmentSetupError(
            f"{path / DESCRIPTION} is not a forecastaudit environment; create the environment "
            "again with 'forecastaudit environment create'."
        )
    return EnvironmentInfo(
        name=str(data.get("name", path.name)),
        path=path,
        python=str(data.get("python", "")),
        requested=list(data.get("requested", [])),
        installed={str(k): str(v) for k, v in data.get("installed", {}).items()},
        created=str(data.get("created", "")),
    )


#: What an environment's interpreter is asked, to show that it starts: its version.
_VERSION_CHECK = "import sys; print('%d.%d.%d' % sys.version_info[:3])"


def recreate_command(info: EnvironmentInfo) -> str:
    """The command that re-creates an environment in its place, with its requirements."""
    wanted = " ".join(shlex.quote(r) for r in info.requested) or "PACKAGE==VERSION ..."
    root = info.path.parent
    elsewhere = os.path.abspath(root) != os.path.abspath(environments_folder())
    where = f" --folder {shlex.quote(str(root))}" if elsewhere else ""
    return f"forecastaudit environment create {info.name} {wanted} --replace{where}"


def interpreter_problem(
    info: EnvironmentInfo, *, run: bool = True, timeout: float = 60.0
) -> str | None:
    """None when the environment's interpreter is there and starts; otherwise what is wrong
    with it and how to fix it.

    Parameters
    ----------
    info : EnvironmentInfo
    run : bool
        Also start the interpreter and ask its version (default), which must be the one the
        environment was made with (major and minor). Without it, only that the interpreter
        is an executable file is checked.
    timeout : float
        Seconds the interpreter may take to answer.
    """
    interpreter = info.interpreter
    fix = f"re-create it with '{recreate_command(info)}'"
    if not interpreter.exists():
        if interpreter.is_symlink():
            return (
                f"its interpreter {interpreter} links to {os.readlink(interpreter)}, which does "
                f"not exist (the Python it was made from was moved or removed); {fix}"
            )
        return f"its interpreter {interpreter} is missing; {fix}"
    if not interpreter.is_file():
        return f"its interpreter {interpreter} is not a file; {fix}"
    if not os.access(interpreter, os.X_OK):
        return f"its interpreter {interpreter} is not executable; {fix}"
    if not run:
        return None
    try:
        done = subprocess.run(
            [str(interpreter), "-I", "-c", _VERSION_CHECK],
            capture_output=True,
            text=True,
            timeout=timeout,
            check=False,
        )
    except subprocess.TimeoutExpired:
        return f"its interpreter {interpreter} did not answer within {timeout:g} s; {fix}"
    except OSError as exc:
        return f"its interpreter {interpreter} cannot start ({exc}); {fix}"
    if done.returncode != 0:
        tail = (done.stderr or done.stdout).strip()[-500:]
        said = f": {tail}" if tail else ""
        return f"its interpreter {interpreter} does not run (exit {done.returncode}{said}); {fix}"
    version = done.stdout.strip()
    if not re.fullmatch(r"\d+\.\d+\.\d+", version):
        return (
            f"its interpreter {interpreter} ran but did not answer as Python does (it printed "
            f"{version[:100]!r}); {fix}"
        )
    if info.python and version.split(".")[:2] != info.python.split(".")[:2]:
        return (
            f"its interpreter {interpreter} now runs Python {version}, but the environment was "
            f"made with Python {info.python} and its packages were installed for that; {fix}"
        )
    return None


def list_environments(
    folder: str | os.PathLike[str] | None = None, *, check: bool = True
) -> list[EnvironmentInfo]:
    """Every environment in the folder, by name.

    Each is checked (unless ``check=False``): one whose interpreter is missing or does not
    start, or whose description cannot be read, is listed with ``problem`` saying why and
    how to fix it. Folders without an ``environment.json`` (and hidden ones: builds in
    progress) are skipped. A folder that does not exist yet holds none.

    Raises
    ------
    EnvironmentSetupError
        When the folder is a file.
    """
    root = _check_folder(environments_folder(folder))
    if not root.is_dir():
        return []
    found = []
    for path in sorted(root.iterdir()):
        if path.is_dir() and not path.name.startswith(".") and (path / DESCRIPTION).is_file():
            try:
                info = _read(path)
            except EnvironmentSetupError as exc:
                found.append(
                    EnvironmentInfo(name=path.name, path=path, python="", problem=str(exc))
                )
                continue
            found.append(replace(info, problem=interpreter_problem(info)) if check else info)
    return found


def get_environment(
    name: str, folder: str | os.PathLike[str] | None = None, *, check: bool = True
) -> EnvironmentInfo:
    """The environment of that name, checked to be usable.

    Parameters
    ----------
    name : str
    folder : path, optional
        The environments folder (default: :func:`environments_folder`).
    check : bool
        Start its interpreter to check it works (default; see :func:`interpreter_problem`).

    Raises
    ------
    EnvironmentSetupError
        When there is none (listing those there are), when it is broken (saying why and how
        to re-create it), or when the folder is a file.
    """
    root = _check_folder(environments_folder(folder))
    path = root / _check_name(name)
    if not (path / DESCRIPTION).is_file():
        known = ", ".join(e.name for e in list_environments(folder, check=False)) or "none"
        raise EnvironmentSetupError(
            f"No environment {name!r} in {root} (environments there: {known}). Create it with "
            f"'forecastaudit environment create {name} PACKAGE==VERSION ...'."
        )
    info = _read(path)
    if check:
        problem = interpreter_problem(info)
        if problem is not None:
            raise EnvironmentSetupError(
                f"The environment {name!r} ({path}) is broken and cannot be used: {problem}."
            )
    return info


def describe_environments(folder: str | os.PathLike[str] | None = None) -> str:
    """The listing ``forecastaudit environment list`` prints: each environment with its
    Python and what it can run, or why it is broken.

    Raises
    ------
    EnvironmentSetupError
        When the folder is a file.
    """
    from forecastaudit.adapters.other_environment import SUPPORTED

    root = _check_folder(environments_folder(folder))
    if not root.exists():
        return (
            f"Environments in {root}: none (the folder does not exist yet; 'forecastaudit "
            "environment create NAME PACKAGE==VERSION ...' makes it)"
        )
    found = list_environments(folder)
    broken = sum(info.broken for info in found)
    lines = [
        f"Environments in {root}: {len(found) or 'none'}"
        + (f" ({broken} broken)" if broken else "")
    ]
    for info in found:
        if info.problem is not None:
            lines.append(f"{info.name:24} BROKEN: {info.problem}")
            continue
        runs = [
            f"{key} ({package} {info.version_of(package)})"
            for key, package in SUPPORTED.items()
            if info.version_of(package)
        ]
        lines.append(
            f"{info.name:24} Python {info.python:8} created {info.created}; "
            f"runs {', '.join(runs) or 'nothing this release can run'}"
        )
    return "\n".join(lines)
