"""Messages of the file reader for files that are broken as files, not as series.

The scenario: the fictional Harrowgate Water Board exports the monthly water demand of its
network (megalitres per month, 2018-2021) from a billing system, and the export goes wrong
in the ways a user trial found: a row with an extra field, a header and nothing under it,
a picture saved under a .csv name, a typing slip in the demand column. Every file is
refused with a :class:`~forecastaudit.errors.SeriesError` whose message names the file, the
line where there is one, and the fix; the command line exits with code 2, writes nothing
and shows no pandas warning. The values are invented.
"""

from __future__ import annotations

import gzip
import warnings
from collections.abc import Callable
from pathlib import Path

import numpy as np
import pandas as pd
import pytest

from forecastaudit.cli import EXIT_USAGE, main
from forecastaudit.errors import SeriesError
from forecastaudit.reading import read_regressors, read_series, read_table

MODEL = "ARIMA(0,1,1)x(0,1,1)12"
HEADER = "month,demand"
MONTHS = 48
ONE_FIELD_PER_COLUMN = (
    "Give every row one field per column of the header (look for a stray comma or a value "
    "in the wrong place; a missing value is an empty field)."
)

pytestmark = pytest.mark.filterwarnings("error")


def demand_rows() -> list[str]:
    """The data rows of the export: month and demand in megalitres (invented values)."""
    rng = np.random.default_rng(2024)
    months = pd.period_range("2018-01", periods=MONTHS, freq="M").astype(str)
    values = 410 + 35 * np.sin(np.arange(MONTHS) * np.pi / 6) + rng.normal(0, 4, MONTHS)
    return [f"{month},{value:.1f}" for month, value in zip(months, values, strict=True)]


def write(tmp_path: Path, name: str, lines: list[str]) -> Path:
    path = tmp_path / name
    path.write_text("\n".join(lines) + "\n", encoding="utf-8")
    return path


def with_row(index: int, row: str) -> list[str]:
    """The export with data row ``index`` (0 = first, on line 2) replaced by ``row``."""
    rows = demand_rows()
    rows[index] = row
    return [HEADER, *rows]


def png_bytes() -> bytes:
    return b"\x89PNG\r\n\x1a\n" + np.random.default_rng(8).bytes(600)


# --- a row with the wrong number of fields


@pytest.mark.parametrize("column", [None, "demand"])
def test_an_extra_field_in_the_first_data_row_names_its_line(tmp_path, column):
    # pandas would take the first column for the index here and read the file "fine".
    path = write(tmp_path, "harrowgate.csv", with_row(0, "2018-01,423.4,99"))
    with pytest.raises(SeriesError) as info:
        read_series(path, column)
    assert str(info.value) == (
        f"Line 2 of {path} has 3 fields, but the header has 2. {ONE_FIELD_PER_COLUMN}"
    )


@pytest.mark.parametrize("column", [None, "demand"])
def test_an_extra_field_further_down_names_its_line(tmp_path, column):
    path = write(tmp_path, "harrowgate.csv", with_row(16, "2019-05,423.4,99"))
    with pytest.raises(SeriesError, match=r"^Line 18 of .* has 3 fields, but the header has 2"):
        read_series(path, column)


def test_a_row_with_a_field_missing_names_its_line(tmp_path):
    path = write(tmp_path, "harrowgate.csv", with_row(3, "2018-04"))
    with pytest.raises(SeriesError) as info:
        read_series(path, "demand")
    assert str(info.value) == (
        f"Line 5 of {path} has 1 field, but the header has 2. {ONE_FIELD_PER_COLUMN}"
    )


def test_line_numbers_count_blank_lines_and_quoted_line_breaks(tmp_path):
    rows = demand_rows()
    lines = ["month,demand,note", f"{rows[0]},", "", f'{rows[1]},"meter swap', 'at Eastfold"']
    lines += [f"{rows[2]},", f"{rows[3]},late,read"]
    path = write(tmp_path, "notes.csv", lines)
    with pytest.raises(SeriesError, match=r"^Line 7 of .* has 4 fields, but the header has 3"):
        read_table(path)


def test_a_missing_value_written_as_an_empty_field_is_not_a_ragged_row(tmp_path):
    path = write(tmp_path, "harrowgate.csv", with_row(3, "2018-04,"))
    series = read_series(path, "demand")
    assert series.isna().sum() == 1
    assert np.isnan(series.iloc[3])


def test_a_comma_at_the_end_of_every_line_still_reads(tmp_path):
    path = write(tmp_path, "trailing.csv", [f"{line}," for line in [HEADER, *demand_rows()]])
    series = read_series(path, "demand")
    expected = [float(row.split(",")[1]) for row in demand_rows()]
    assert series.tolist() == expected
    assert str(series.index[0]) == "2018-01"


def test_regressors_from_a_ragged_file_are_refused_too(tmp_path):
    rows = [f"{row},{12.5 + i}" for i, row in enumerate(demand_rows())]
    rows[5] += ",7"
    path = write(tmp_path, "rain.csv", [f"{HEADER},rainfall", *rows])
    with pytest.raises(SeriesError, match=r"^Line 7 of .* has 4 fields, but the header has 3"):
        read_regressors(path, ["rainfall"])


def test_a_quote_that_is_never_closed_names_its_line(tmp_path):
    path = write(tmp_path, "harrowgate.csv", with_row(4, '2018-05,"431.0'))
    with pytest.raises(SeriesError) as info:
        read_series(path, "demand")
    assert str(info.value) == (
        f'{path} has a quote (") that is never closed (in the row that starts on line 6); '
        "close it, or remove it."
    )


# --- a file with no data


def test_a_header_with_no_rows(tmp_path):
    path = write(tmp_path, "harrowgate.csv", [HEADER])
    with pytest.raises(SeriesError) as info:
        read_series(path, None)
    assert str(info.value) == (
        f"{path} has a header but no data rows (columns: 'month', 'demand'); add one row per "
        "period below the header."
    )


def test_an_empty_file(tmp_path):
    path = tmp_path / "harrowgate.csv"
    path.write_bytes(b"")
    with pytest.raises(SeriesError) as info:
        read_series(path, None)
    assert str(info.value) == (
        f"{path} is empty; give a CSV file with a header row and one row per period."
    )


def test_a_parquet_file_with_no_rows(tmp_path):
    path = tmp_path / "harrowgate.parquet"
    pd.DataFrame({"month": pd.Series([], dtype=str), "demand": []}).to_parquet(path)
    with pytest.raises(
        SeriesError, match=r"has columns \(.*\) but no rows; give a file with one row"
    ):
        read_series(path, None)


# --- not a text file


BINARY_FIX = "Give a CSV file (plain text, one row per period) or a .parquet file."


def test_random_bytes_are_binary(tmp_path):
    path = tmp_path / "harrowgate.csv"
    path.write_bytes(np.random.default_rng(3).bytes(2000))
    with pytest.raises(SeriesError) as info:
        read_series(path, None)
    assert str(info.value) == (
        f"{path} does not look like a text CSV file (it holds binary data). {BINARY_FIX}"
    )


def test_a_picture_renamed_csv_is_binary(tmp_path):
    path = tmp_path / "demand-chart.csv"
    path.write_bytes(png_bytes())
    with pytest.raises(SeriesError) as info:
        read_series(path, "demand")
    assert str(info.value) == (
        f"{path} does not look like a text CSV file (it holds binary data, and it begins as "
        f"a PNG image does). {BINARY_FIX}"
    )


def test_a_parquet_file_with_a_csv_name_is_told_its_suffix(tmp_path):
    path = tmp_path / "harrowgate.csv"
    pd.DataFrame({"demand": [410.5, 398.2]}).to_parquet(path)
    with pytest.raises(SeriesError) as info:
        read_table(path)
    assert str(info.value).endswith(
        "(it holds binary data, and it begins as a Parquet file does). If it is a Parquet "
        "file, give it a .parquet or .pq suffix; else give a CSV file."
    )


def test_a_file_in_another_encoding_names_the_line(tmp_path):
    lines = [f"{HEADER},district", *(f"{row},Eastfold" for row in demand_rows())]
    lines[9] = lines[9].replace("Eastfold", "Sainte-Hélène")
    path = tmp_path / "harrowgate.csv"
    path.write_bytes(("\n".join(lines) + "\n").encode("latin-1"))
    with pytest.raises(SeriesError) as info:
        read_series(path, "demand")
    assert str(info.value) == (
        f"{path} is not UTF-8 text: line 10 has the byte 0xE9, which UTF-8 does not allow "
        "there. Save the file as UTF-8 (a spreadsheet calls it 'CSV UTF-8') and re-run."
    )


def test_a_utf16_file(tmp_path):
    path = tmp_path / "harrowgate.csv"
    path.write_bytes(("\n".join([HEADER, *demand_rows()]) + "\n").encode("utf-16"))
    with pytest.raises(SeriesError, match=r"is saved as UTF-16 text, which is not read\. Save"):
        read_series(path, None)


# --- text among the numbers


def test_text_in_the_only_value_column_is_named_without_column(tmp_path):
    path = write(tmp_path, "harrowgate.csv", with_row(6, "2018-07,abc"))
    with pytest.raises(SeriesError) as info:
        read_series(path, None)
    assert str(info.value) == (
        f"Column 'demand' of {path} holds numbers but also text: 'abc' on line 8. Correct the "
        "value (a missing value is an empty field), or choose the column to audit with "
        "--column."
    )


def test_several_text_values_and_columns(tmp_path):
    rows = [f"{row},{30 + i}.0" for i, row in enumerate(demand_rows())]
    rows[6] = "2018-07,abc,36.0"
    rows[8] = "2018-09,-,38.0"
    rows[11] = "2018-12,412.0,n.a."
    path = write(tmp_path, "harrowgate.csv", [f"{HEADER},rainfall", *rows])
    with pytest.raises(SeriesError) as info:
        read_series(path, None)
    assert str(info.value) == (
        f"Columns 'demand', 'rainfall' of {path} hold numbers but also text: 'abc' on line 8 "
        "(and 1 more) in 'demand'; 'n.a.' on line 13 in 'rainfall'. Correct those values (a "
        "missing value is an empty field), or choose the column to audit with --column."
    )


def test_a_broken_column_is_not_passed_over_for_another_numeric_one(tmp_path):
    rows = [f"{row},{30 + i}.0" for i, row in enumerate(demand_rows())]
    rows[6] = "2018-07,abc,36.0"
    path = write(tmp_path, "harrowgate.csv", [f"{HEADER},rainfall", *rows])
    with pytest.raises(SeriesError, match=r"^Column 'demand' of .*: 'abc' on line 8\. Correct"):
        read_series(path, None)
    # Named, the good column reads.
    assert read_series(path, "rainfall").iloc[0] == 30.0


def test_a_column_of_labels_is_not_taken_for_numbers(tmp_path):
    rows = [f"{row},zone-{i % 3}" for i, row in enumerate(demand_rows())]
    path = write(tmp_path, "harrowgate.csv", [f"{HEADER},zone", *rows])
    series = read_series(path, None)
    assert series.name == "demand"
    assert len(series) == MONTHS


# --- good files read as before, and files are left as they are


def test_good_files_read_unchanged(tmp_path):
    lines = [HEADER, *demand_rows()]
    plain_csv = write(tmp_path, "harrowgate.csv", lines)
    crlf_bom = tmp_path / "harrowgate-excel.csv"
    crlf_bom.write_bytes(b"\xef\xbb\xbf" + ("\r\n".join(lines) + "\r\n").encode())
    packed = tmp_path / "harrowgate.csv.gz"
    packed.write_bytes(gzip.compress(("\n".join(lines) + "\n").encode()))
    expected = [float(row.split(",")[1]) for row in demand_rows()]
    for path in (plain_csv, crlf_bom, packed):
        series = read_series(path, None)
        assert series.name == "demand"
        assert series.tolist() == expected
        assert isinstance(series.index, pd.PeriodIndex)
        assert str(series.index[-1]) == "2021-12"


def test_the_file_is_not_changed(tmp_path):
    path = write(tmp_path, "harrowgate.csv", with_row(16, "2019-05,423.4,99"))
    before = path.read_bytes()
    with pytest.raises(SeriesError):
        read_series(path, None)
    assert path.read_bytes() == before


# --- through the command line


def _ragged(tmp_path: Path) -> Path:
    return write(tmp_path, "harrowgate.csv", with_row(16, "2019-05,423.4,99"))


def _header_only(tmp_path: Path) -> Path:
    return write(tmp_path, "harrowgate.csv", [HEADER])


def _picture(tmp_path: Path) -> Path:
    path = tmp_path / "harrowgate.csv"
    path.write_bytes(png_bytes())
    return path


def _typo(tmp_path: Path) -> Path:
    return write(tmp_path, "harrowgate.csv", with_row(6, "2018-07,abc"))


@pytest.mark.parametrize(
    ("make", "phrase"),
    [
        (_ragged, "Line 18 of {path} has 3 fields, but the header has 2."),
        (_header_only, "{path} has a header but no data rows"),
        (_picture, "{path} does not look like a text CSV file (it holds binary data"),
        (_typo, "Column 'demand' of {path} holds numbers but also text: 'abc' on line 8."),
    ],
)
def test_the_command_line_exits_2_and_writes_nothing(
    tmp_path: Path,
    capsys: pytest.CaptureFixture[str],
    make: Callable[[Path], Path],
    phrase: str,
) -> None:
    path = make(tmp_path)
    out = tmp_path / "audit-out"
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        code = main(["audit", str(path), "--model", MODEL, "--out", str(out), "--quiet"])
    captured = capsys.readouterr()
    assert code == EXIT_USAGE
    assert captured.err.startswith("forecastaudit: error: ")
    assert phrase.format(path=path) in captured.err
    assert "Traceback" not in captured.err
    assert "Warning" not in captured.err
    assert captured.out == ""
    assert not out.exists()
    assert sorted(p.name for p in tmp_path.iterdir()) == [path.name]
