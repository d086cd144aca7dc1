# SPDX-License-Identifier: GPL-3.0-or-later
"""Input and error translation: CSV files, DataFrames, Series, exceptions."""
import datetime

import os
import subprocess
import sys

import numpy as np
import pandas as pd   # python3-pandas: required by these tests (not by twofold)
import pytest

import twofold


GOOD = ("region,date,cases,admissions\n"
        "North,2025-01-01,5,1\n"
        "North,2025-01-02,7,0\n"
        "South,2025-01-01,3,0\n"
        "North,2025-01-04,9,2\n")


def test_read_csv_file(tmp_path):
    path = tmp_path / "good.csv"
    path.write_text(GOOD)
    regions = twofold.read_csv(path)
    assert list(regions) == ["North", "South"]
    north = regions["North"]
    assert north.start == datetime.date(2025, 1, 1)
    assert list(north.columns) == ["cases", "admissions"]
    # a missing date is missing (NaN), never zero
    np.testing.assert_array_equal(north.values, [5, 7, np.nan, 9])
    assert north.gaps() == [(datetime.date(2025, 1, 3), 1)]
    frame = north.to_frame()
    assert list(frame.columns) == ["region", "date", "cases", "admissions"]
    assert frame["date"].iloc[3] == pd.Timestamp("2025-01-04")


def test_bad_csv_raises_with_line_number(tmp_path):
    path = tmp_path / "bad.csv"
    path.write_text(GOOD + "South,2025-02-30,4,0\n")   # line 6: no Feb 30
    with pytest.raises(twofold.TwofoldError) as info:
        twofold.read_csv(path)
    err = info.value
    assert err.code == twofold.CODES["EDATE"]
    assert err.name == "TWOFOLD_EDATE"
    assert err.line == 6
    assert ":6:" in err.message and "bad.csv" in err.message
    assert ":6:" in str(err)


def test_bad_csv_from_memory_names_source():
    data = (GOOD + "South,2025-01-02,-4,0\n").encode()  # negative count
    with pytest.raises(twofold.TwofoldError) as info:
        twofold.read_csv(data, name="upload.csv")
    assert info.value.code == twofold.CODES["ECOUNT"]
    assert info.value.line == 6
    assert "upload.csv:6:" in info.value.message


def test_missing_file_is_an_error(tmp_path):
    with pytest.raises(twofold.TwofoldError) as info:
        twofold.read_csv(tmp_path / "absent.csv")
    assert info.value.code == twofold.CODES["EIO"]


def test_from_frame_matches_reader(tmp_path):
    path = tmp_path / "good.csv"
    path.write_text(GOOD)
    frame = pd.read_csv(path, dtype={"cases": "Int64"})
    a = twofold.from_frame(frame)
    b = twofold.read_csv(path)
    assert list(a) == list(b)
    for k in a:
        assert a[k].first_day == b[k].first_day
        for c in b[k].columns:
            np.testing.assert_array_equal(a[k].columns[c], b[k].columns[c])


def test_from_frame_rejects_duplicates_and_bad_counts():
    frame = pd.DataFrame({"region": ["A", "A"], "date": ["2025-01-01"] * 2,
                          "cases": [1, 2]})
    with pytest.raises(twofold.TwofoldError) as info:
        twofold.from_frame(frame)
    assert info.value.name == "TWOFOLD_EDUPLICATE"
    frame = pd.DataFrame({"region": ["A", "A"],
                          "date": ["2025-01-01", "2025-01-02"],
                          "cases": [1, 2.5]})
    with pytest.raises(twofold.TwofoldError) as info:
        twofold.from_frame(frame)
    assert info.value.name == "TWOFOLD_ECOUNT"


def test_series_with_datetime_index_and_integer_na():
    idx = pd.to_datetime(["2025-01-03", "2025-01-01", "2025-01-02",
                          "2025-01-05"])
    s = pd.Series(pd.array([3, 1, pd.NA, 5], dtype="Int64"), index=idx)
    ds = twofold.DailySeries.of(s)
    assert ds.start == datetime.date(2025, 1, 1)
    np.testing.assert_array_equal(ds.values, [1, np.nan, 3, np.nan, 5])


def test_fit_errors_carry_library_message():
    with pytest.raises(twofold.TwofoldError) as info:
        twofold.fit_window(np.zeros(28), "2025-01-06", model="poisson")
    assert info.value.code == twofold.CODES["EZERO"]
    assert info.value.message
    with pytest.raises(ValueError):
        twofold.fit_window(np.ones(28) * 10, model="poisson")  # no dates
    with pytest.raises(twofold.TwofoldError) as info:
        twofold.fit_window(np.ones(28) * 10, "2025-01-06", model="gamma")
    assert info.value.code == twofold.CODES["EINVAL"]


def test_latest_growth_frame():
    rng = np.random.default_rng(7)
    days = pd.date_range("2025-01-01", periods=42, freq="D")
    rows = []
    for region, r in (("East", 0.04), ("West", -0.03)):
        y = rng.poisson(50 * np.exp(r * np.arange(42)))
        rows += [{"region": region, "date": d, "cases": int(v)}
                 for d, v in zip(days, y)]
    rows.append({"region": "Empty", "date": days[0], "cases": 0})
    table = twofold.latest_growth(pd.DataFrame(rows), window=28,
                                  model="poisson")
    assert list(table["region"]) == ["East", "West", "Empty"]
    assert table["start"].iloc[0] == pd.Timestamp("2025-01-15")
    assert table["end"].iloc[0] == pd.Timestamp("2025-02-11")
    assert list(table["status"][:2]) == ["TWOFOLD_OK", "TWOFOLD_OK"]
    assert table["sense"].iloc[0] == 1 and table["sense"].iloc[1] == -1
    assert table["status"].iloc[2] != "TWOFOLD_OK"
    assert np.isnan(table["rate"].iloc[2])


def test_works_without_pandas():
    # pandas is optional: block its import in a fresh interpreter.
    code = ("import sys; sys.modules['pandas'] = None\n"
            "import numpy as np, twofold\n"
            "rng = np.random.default_rng(3)\n"
            "y = rng.poisson(40 * np.exp(0.03 * np.arange(28)))\n"
            "ds = twofold.DailySeries.of(y, '2025-01-06', region='A')\n"
            "rows = twofold.latest_growth([ds], 28, model='poisson')\n"
            "assert isinstance(rows, list) and rows[0]['status'] == "
            "'TWOFOLD_OK', rows\n"
            "r = twofold.roll_window(y, 14, '2025-01-06', model='poisson')\n"
            "assert r.dates[0] == np.datetime64('2025-01-06')\n"
            "print('ok')\n")
    env = dict(os.environ)
    env["PYTHONPATH"] = os.pathsep.join(
        [os.path.join(os.path.dirname(__file__), os.pardir)] +
        [p for p in [env.get("PYTHONPATH")] if p])
    out = subprocess.run([sys.executable, "-c", code], env=env,
                         capture_output=True, text=True)
    assert out.returncode == 0, out.stderr
    assert out.stdout.strip() == "ok"
