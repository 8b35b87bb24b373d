"""The input forms of fit_cities: mapping, long frame, folder of CSVs, CSV and Parquet with a city column.

Each form must give the same cities with the same data, so the same estimates (checked by equality with a
fit on a mapping); bad input is refused with a message naming the column, the files or the keys.
"""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest

import airhealth
from airhealth import DataError, SpecificationError
from airhealth.cities.inputs import CsvFolder, ParquetRows, city_tasks
from airhealth.cities.simulate_cities import simulate_cities

MODEL = {"outcome": "deaths", "exposure": "pm25", "temperature": "temperature"}


@pytest.fixture(scope="module")
def scenario():
    return simulate_cities(n_cities=3, years=2, seed=11)


def fit(cities, **kw):
    return airhealth.fit_cities(cities, "serial", show_progress=False, **MODEL, **kw)


def test_every_input_form_gives_the_same_estimates(scenario, tmp_path):
    expected = fit(scenario.frames)
    folder = tmp_path / "folder"
    folder.mkdir()
    for name, frame in scenario.frames.items():
        frame.to_csv(folder / f"{name}.csv", index=False)
    long = scenario.long()
    long.to_csv(tmp_path / "long.csv", index=False)
    long.to_parquet(tmp_path / "long.parquet")
    forms = {
        "long frame": fit(long, city="city"),
        "folder": fit(folder),
        "folder object": fit(CsvFolder(folder)),
        "long csv": fit(tmp_path / "long.csv", city="city"),
        "parquet": fit(str(tmp_path / "long.parquet"), city="city"),
    }
    for form, got in forms.items():
        assert sorted(got.city) == sorted(expected.city), form
        got = got.set_index("city").loc[expected.city]
        # same data, same model: the CSV round trip keeps every digit written (1 decimal), so equal to rounding
        np.testing.assert_allclose(got.coef, expected.coef.to_numpy(), rtol=1e-9, err_msg=form)
        np.testing.assert_allclose(got.se, expected.se.to_numpy(), rtol=1e-9, err_msg=form)


def test_a_parquet_worker_reads_only_its_city_and_the_model_columns(scenario, tmp_path):
    long = scenario.long().assign(unused=1.0)
    long.to_parquet(tmp_path / "long.parquet")
    tasks = city_tasks(tmp_path / "long.parquet", city="city")
    assert all(isinstance(t.source, ParquetRows) for t in tasks)
    frame = tasks[0].source.load(["date", "deaths", "pm25"])
    assert list(frame.columns) == ["date", "deaths", "pm25"]
    assert len(frame) == len(scenario.frames[tasks[0].name])


def test_a_missing_city_column_is_named_with_the_columns_present(scenario, tmp_path):
    long = scenario.long()
    with pytest.raises(DataError, match=r"the city column 'town' is not in the data; its columns are \['date', "):
        fit(long, city="town")
    long.to_parquet(tmp_path / "long.parquet")
    with pytest.raises(DataError, match=r"the city column 'town' is not in the Parquet data .*'deaths'"):
        fit(tmp_path / "long.parquet", city="town")
    with pytest.raises(SpecificationError) as caught:
        fit(long)
    # before, it asserted the table "holds several cities", also for a one-city file without a city column
    assert str(caught.value).startswith("the data is read as one table of several cities: name its city column, e.g.")
    assert "(on the command line --city COL; its columns are ['date', " in str(caught.value)
    assert str(caught.value).endswith("or give a folder with one CSV file per city.")


def test_duplicate_city_names_are_refused_naming_both(scenario, tmp_path):
    frame = scenario.frames["Alderwick"]
    with pytest.raises(
        DataError, match=r"two cities have the same name 'Alderwick': key 'Alderwick' and key ' Alderwick '"
    ):
        fit({"Alderwick": frame, " Alderwick ": frame})
    folder = tmp_path / "folder"
    folder.mkdir()
    frame.to_csv(folder / "Alderwick.csv", index=False)
    frame.to_csv(folder / "ALDERWICK.csv", index=False)
    with pytest.raises(DataError, match=r"file 'ALDERWICK.csv' and file 'Alderwick.csv' \(equal ignoring case\)"):
        fit(folder)
    long = pd.concat([frame.assign(city="Ayr"), frame.assign(city="Ayr ")])
    with pytest.raises(DataError, match="two cities have the same name 'Ayr'"):
        fit(long, city="city")


def test_an_empty_city_is_reported_and_the_others_are_fitted(scenario, tmp_path):
    frames = dict(scenario.frames)
    frames["Nowhere"] = scenario.frames["Alderwick"].iloc[:0]
    with pytest.warns(airhealth.DataWarning, match=r"1 of 4 cities could not be fitted \(Nowhere\)"):
        table = fit(frames)
    with pytest.raises(DataError) as single:
        airhealth.fit(frames["Nowhere"], **MODEL)
    assert table.set_index("city").loc["Nowhere", "error"] == str(single.value)
    assert (table.error != "").sum() == 1
    folder = tmp_path / "folder"
    folder.mkdir()
    (folder / "Empty.csv").write_text("")
    scenario.frames["Alderwick"].to_csv(folder / "Alderwick.csv", index=False)
    with pytest.warns(airhealth.DataWarning):
        table = fit(folder)
    assert table.set_index("city").loc["Empty", "error"] == (
        "the file Empty.csv is empty; give a header row and one row per day."
    )


def test_city_is_refused_where_the_cities_are_already_named(scenario, tmp_path):
    with pytest.raises(SpecificationError, match="a mapping's keys are the city names already"):
        fit(scenario.frames, city="city")
    scenario.frames["Alderwick"].to_csv(tmp_path / "Alderwick.csv", index=False)
    with pytest.raises(SpecificationError, match=rf"city='city' names .* but {tmp_path} is a folder of CSV files"):
        fit(tmp_path, city="city")


def test_a_parquet_city_missing_a_model_column_gets_the_message_listing_every_column(scenario, tmp_path):
    scenario.long().drop(columns="temperature").to_parquet(tmp_path / "long.parquet")
    with pytest.warns(airhealth.DataWarning, match="could not be fitted"):
        table = fit(tmp_path / "long.parquet", city="city")
    with pytest.raises(DataError) as single:
        airhealth.fit(scenario.frames["Alderwick"].drop(columns="temperature"), **MODEL)
    assert table.set_index("city").loc["Alderwick", "error"] == str(single.value)


def test_no_cities_and_unknown_inputs_are_refused(tmp_path):
    with pytest.raises(DataError, match="no cities were given"):
        fit({})
    with pytest.raises(DataError, match=f"the folder {tmp_path} holds no CSV files"):
        fit(tmp_path)
    with pytest.raises(DataError, match="does not exist"):
        fit(tmp_path / "nothing")
    with pytest.raises(DataError, match=r"cities must be a mapping of name to DataFrame.*got list"):
        fit([1, 2])
    with pytest.raises(DataError, match=r"city 'Alderwick' is given as int"):
        fit({"Alderwick": 3})


def test_fewer_than_two_fitted_cities_cannot_be_pooled(scenario):
    frames = {"Alderwick": scenario.frames["Alderwick"], "Broken": scenario.frames["Alderwick"].iloc[:0]}
    with pytest.warns(airhealth.DataWarning):
        table = fit(frames)
    with (
        pytest.warns(airhealth.DataWarning),
        pytest.raises(DataError, match=r"at least two usable cities; got 1 \(Alderwick\)"),
    ):
        airhealth.pool(table)


def test_the_callers_frames_are_not_changed(scenario):
    frames = {k: v.copy() for k, v in scenario.frames.items()}
    long = scenario.long()
    before = long.copy()
    fit(frames)
    fit(long, city="city")
    pd.testing.assert_frame_equal(long, before)
    for name, frame in frames.items():
        pd.testing.assert_frame_equal(frame, scenario.frames[name])
