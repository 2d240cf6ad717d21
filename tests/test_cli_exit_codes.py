"""Exit codes of the command line, output paths checked first, and outputs written as a set.

The codes are documented in ``forecastaudit.cli`` and in every command's ``--help``.
"""

from __future__ import annotations

import os
import stat
import subprocess
import sys
from pathlib import Path

import numpy as np
import pandas as pd
import pytest

import forecastaudit as fa
from forecastaudit import cli
from forecastaudit.cli import (
    EXIT_FINDINGS,
    EXIT_INTERNAL,
    EXIT_NO_ESTIMATE,
    EXIT_PASS,
    EXIT_USAGE,
    main,
)

ROOT = Path(__file__).resolve().parents[1]
TWO = "statsmodels-sarimax,statsforecast"


@pytest.fixture
def csv(tmp_path: Path) -> Path:
    rng = np.random.default_rng(5)
    x = np.zeros(60)
    for t in range(1, 60):
        x[t] = 0.5 * x[t - 1] + rng.normal()
    frame = pd.DataFrame(
        {"month": pd.period_range("2019-01", periods=60, freq="M").astype(str), "units": 20 + x}
    )
    path = tmp_path / "units.csv"
    frame.to_csv(path, index=False)
    return path


def _audit(csv: Path, out: Path, *extra: str) -> list[str]:
    return [
        "audit",
        str(csv),
        "--column",
        "units",
        "--model",
        "ARIMA(1,0,0) +mean",
        "--estimators",
        TWO,
        "--quiet",
        "--out",
        str(out),
        *extra,
    ]


def _files(folder: Path) -> list[str]:
    return sorted(str(p.relative_to(folder)) for p in folder.rglob("*"))


def test_every_estimator_failing_exits_4_and_writes_nothing(
    csv: Path, tmp_path: Path, monkeypatch: pytest.MonkeyPatch, capsys: pytest.CaptureFixture
) -> None:
    from forecastaudit.adapters import registry

    def fail(self: object, request: object) -> object:
        raise RuntimeError("forced failure")

    for key in TWO.split(","):
        monkeypatch.setattr(registry.adapter_class(key), "_fit", fail)
    before = _files(tmp_path)
    assert main(_audit(csv, tmp_path / "out")) == EXIT_NO_ESTIMATE
    err = capsys.readouterr().err
    assert "No estimator produced an estimate" in err and "nothing was written" in err
    assert "statsforecast: failed" in err
    assert _files(tmp_path) == before


def test_an_unexpected_exception_exits_3_with_a_short_message(
    csv: Path, tmp_path: Path, monkeypatch: pytest.MonkeyPatch, capsys: pytest.CaptureFixture
) -> None:
    import forecastaudit.pipeline

    def broken(*args: object, **kwargs: object) -> None:
        raise ZeroDivisionError("division by zero")

    monkeypatch.setattr(forecastaudit.pipeline, "audit", broken)
    assert main(_audit(csv, tmp_path / "out")) == EXIT_INTERNAL
    err = capsys.readouterr().err
    assert "internal error: ZeroDivisionError: division by zero" in err
    assert "Traceback" not in err and "--debug" in err
    assert main(["--debug", *_audit(csv, tmp_path / "out")]) == EXIT_INTERNAL
    assert "Traceback (most recent call last)" in capsys.readouterr().err
    assert not (tmp_path / "out").exists()


def test_output_folder_that_is_a_file_is_refused_before_the_audit(
    csv: Path, tmp_path: Path, monkeypatch: pytest.MonkeyPatch, capsys: pytest.CaptureFixture
) -> None:
    import forecastaudit.pipeline

    def never(*args: object, **kwargs: object) -> None:
        raise AssertionError("the audit ran before the output path was checked")

    monkeypatch.setattr(forecastaudit.pipeline, "audit", never)
    a_file = tmp_path / "taken"
    a_file.write_text("x")
    assert main(_audit(csv, a_file)) == EXIT_USAGE
    assert "is a file; give a folder" in capsys.readouterr().err
    assert main(_audit(csv, a_file / "below")) == EXIT_USAGE
    assert "is below the file" in capsys.readouterr().err
    assert a_file.read_text() == "x"


@pytest.mark.skipif(os.geteuid() == 0, reason="root may write to any folder")
def test_unwritable_output_folder_is_refused_before_the_audit(
    csv: Path, tmp_path: Path, capsys: pytest.CaptureFixture
) -> None:
    locked = tmp_path / "locked"
    locked.mkdir()
    locked.chmod(stat.S_IRUSR | stat.S_IXUSR)
    try:
        assert main(_audit(csv, locked / "out")) == EXIT_USAGE
        assert "is not writable" in capsys.readouterr().err
    finally:
        locked.chmod(stat.S_IRWXU)


def test_unwritable_folder_message_without_root(
    csv: Path, tmp_path: Path, monkeypatch: pytest.MonkeyPatch, capsys: pytest.CaptureFixture
) -> None:
    """The same refusal where the suite runs as root (which may write anywhere): the
    permission check is made to answer no."""
    import forecastaudit.files

    monkeypatch.setattr(forecastaudit.files.os, "access", lambda *a, **k: False)
    assert main(_audit(csv, tmp_path / "out")) == EXIT_USAGE
    assert "is not writable by this user" in capsys.readouterr().err
    assert not (tmp_path / "out").exists()


def test_a_failing_report_writer_leaves_no_file(
    csv: Path, tmp_path: Path, monkeypatch: pytest.MonkeyPatch
) -> None:
    import forecastaudit.files

    real = forecastaudit.files._new_file

    def fail_on_markdown(folder: Path, name: str, text: str) -> Path:
        if name.endswith(".md"):
            raise OSError(28, "No space left on device")
        return real(folder, name, text)

    monkeypatch.setattr(forecastaudit.files, "_new_file", fail_on_markdown)
    out = tmp_path / "out"
    assert main(_audit(csv, out)) == EXIT_USAGE
    assert not out.exists()
    assert _files(tmp_path) == ["units.csv"]
    # Into an existing folder with an earlier run's files: they stay as they were.
    out.mkdir()
    (out / cli.RECORD_NAME).write_text("old record")
    (out / "notes.txt").write_text("mine")
    assert main(_audit(csv, out)) == EXIT_USAGE
    assert _files(out) == sorted([cli.RECORD_NAME, "notes.txt"])
    assert (out / cli.RECORD_NAME).read_text() == "old record"


def test_a_failing_move_puts_the_earlier_files_back(tmp_path: Path, monkeypatch) -> None:
    import forecastaudit.files as files

    out = tmp_path / "out"
    out.mkdir()
    (out / "a.json").write_text("old a")
    real = os.replace
    calls = {"n": 0}

    def flaky(src: object, dst: object) -> None:
        if str(dst).endswith("b.md"):
            raise OSError(5, "Input/output error")
        calls["n"] += 1
        real(src, dst)

    monkeypatch.setattr(files.os, "replace", flaky)
    with pytest.raises(OSError, match="Input/output"):
        files.write_set(out, {"a.json": "new a", "b.md": "new b"})
    assert _files(out) == ["a.json"] and (out / "a.json").read_text() == "old a"


def test_outputs_respect_the_umask(csv: Path, tmp_path: Path) -> None:
    old = os.umask(0o027)
    try:
        assert main(_audit(csv, tmp_path / "out")) in (EXIT_PASS, EXIT_FINDINGS)
    finally:
        os.umask(old)
    out = tmp_path / "out"
    assert stat.S_IMODE(out.stat().st_mode) == 0o750
    for name in (cli.RECORD_NAME, cli.HTML_NAME, cli.MARKDOWN_NAME):
        assert stat.S_IMODE((out / name).stat().st_mode) == 0o640


def test_version_and_per_command_exit_code_help(capsys: pytest.CaptureFixture) -> None:
    with pytest.raises(SystemExit) as stop:
        main(["--version"])
    assert stop.value.code == 0
    assert capsys.readouterr().out.strip() == f"forecastaudit {fa.__version__}"
    # Each command lists the codes it can give, in its own words.
    for command, zero, one, four in (
        ("audit", "the audit passed", "at least one finding is beyond tolerance", True),
        ("changes", "nothing changed beyond tolerance", "changed beyond tolerance", False),
        ("drift", "nothing changed beyond tolerance", "changed beyond tolerance", False),
        ("panel", "every series passed", "at least one series failed", False),
        ("verify", "the record is intact and signed by a trusted key", None, False),
        ("demo", "the demo ran", None, True),
    ):
        with pytest.raises(SystemExit):
            main([command, "--help"])
        text = capsys.readouterr().out
        assert f"0  {zero}" in text and "3  internal error" in text, command
        assert ("1  " in text and one in text) if one else "\n  1  " not in text, command
        assert ("4  no estimator produced" in text) == four, command


def test_subprocess_exit_codes(csv: Path, tmp_path: Path) -> None:
    env = {**os.environ, "PYTHONPATH": str(ROOT)}

    def run(*args: str) -> subprocess.CompletedProcess[str]:
        return subprocess.run(
            [sys.executable, "-m", "forecastaudit.cli", *args],
            capture_output=True,
            text=True,
            env=env,
            timeout=600,
        )

    done = run("--version")
    assert done.returncode == 0 and fa.__version__ in done.stdout
    done = run("audit", str(csv), "--model", "ARIMA(1,0,0)", "--estimators", TWO)
    assert done.returncode in (EXIT_PASS, EXIT_FINDINGS), done.stderr
    done = run("audit", str(csv), "--model", "ARMA(1,0)")
    assert done.returncode == EXIT_USAGE and "Traceback" not in done.stderr
    done = run("verify", str(csv), "--trusted-key", str(csv))
    assert done.returncode == EXIT_USAGE and "Traceback" not in done.stderr


def test_record_names_the_command_line_and_the_input_file(csv: Path, tmp_path: Path) -> None:
    import hashlib
    import json

    out = tmp_path / "out"
    assert main(_audit(csv, out)) in (EXIT_PASS, EXIT_FINDINGS)
    record = fa.load_record(out / cli.RECORD_NAME)
    invocation = record["provenance"]["invocation"]
    assert invocation["command_line"] == ["forecastaudit", *_audit(csv, out)]
    assert invocation["input_file"] == {
        "name": "units.csv",
        "sha256": hashlib.sha256(csv.read_bytes()).hexdigest(),
        "bytes": csv.stat().st_size,
    }
    html = (out / cli.HTML_NAME).read_text()
    assert invocation["input_file"]["sha256"] in html
    assert "input file SHA-256" in (out / cli.MARKDOWN_NAME).read_text()
    assert json.loads((out / cli.RECORD_NAME).read_text()) == record


def test_a_reader_that_leaves_early_does_not_lose_the_audit(csv: Path, tmp_path: Path) -> None:
    """``forecastaudit audit ... | head -1``: the pipe closes before the report is printed.
    The files are still written, the exit code is the audit's, and no error is claimed.
    Output is left buffered (no PYTHONUNBUFFERED), as in a terminal pipe, so that the last
    flush happens as the command ends."""
    env = {k: v for k, v in os.environ.items() if k != "PYTHONUNBUFFERED"}
    env["PYTHONPATH"] = str(ROOT)
    out = tmp_path / "out"
    command = [sys.executable, "-m", "forecastaudit.cli", *_audit(csv, out)]
    process = subprocess.Popen(
        command, stdout=subprocess.PIPE, stderr=subprocess.PIPE, env=env, text=True
    )
    assert process.stdout is not None and process.stderr is not None
    process.stdout.close()  # the reader leaves before the first line
    stderr = process.stderr.read()
    code = process.wait(timeout=600)
    assert code in (EXIT_PASS, EXIT_FINDINGS), stderr
    assert "Broken pipe" not in stderr and "error" not in stderr
    assert sorted(p.name for p in out.iterdir()) == [
        cli.RECORD_NAME,
        cli.HTML_NAME,
        cli.MARKDOWN_NAME,
    ]


def test_an_empty_estimator_list_is_a_usage_error(csv: Path, tmp_path: Path, capsys) -> None:
    out = tmp_path / "out"
    args = ["audit", str(csv), "--model", "ARIMA(1,0,0) +mean", "--estimators", " , ", "--quiet"]
    assert main([*args, "--out", str(out)]) == EXIT_USAGE
    assert "--estimators is empty" in capsys.readouterr().err and not out.exists()


def test_an_unknown_option_is_reported_with_the_commands_usage(capsys) -> None:
    with pytest.raises(SystemExit) as stop:
        main(["changes", "old.json", "new.json", "--bogus"])
    assert stop.value.code == EXIT_USAGE
    err = capsys.readouterr().err
    assert (
        err.startswith("usage: forecastaudit changes") and "unrecognized arguments: --bogus" in err
    )
