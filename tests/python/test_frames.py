"""Results through the Python module equal the command line's files on the demo,
to the last bit: the same library, the same writers (exact number output),
whether the survey comes as a configuration path or as DataFrames."""

import gc
import os

import numpy as np
import pandas as pd
import pandas.testing as pdt
import pytest
import yaml

import paritas
from conftest import DEMO_CONFIG, DEMO_DATA, read_bytes, run_cli

# Files whose text carries the run's identity or timings, compared apart.
RUN_SPECIFIC = {"run.json", "report.html"}


@pytest.fixture(scope="module")
def demo_run():
    return paritas.compute(DEMO_CONFIG, matrices="all")


def demo_frames():
    """The demo survey read into DataFrames, as a notebook would (codes as text)."""
    codes = {"region": str, "item": str, "heading": str, "area": str, "tariff": str}

    def read(name, **kw):
        return pd.read_csv(os.path.join(DEMO_DATA, name), dtype=codes, keep_default_na=False,
                           na_values=[""], float_precision="round_trip", **kw)

    tariffs = read("tariffs.csv", sep=";", decimal=",").rename(
        columns={"area": "region", "tariff": "item", "charge": "price"})
    with open(DEMO_CONFIG, encoding="utf-8") as f:
        config = yaml.safe_load(f)
    with open(os.path.join(DEMO_DATA, "classification.yaml"), encoding="utf-8") as f:
        classification = f.read()  # YAML text, as the module accepts it
    return dict(prices=[read("prices.csv"), tariffs], items=read("items.csv"),
                expenditure=read("expenditure.csv"), regions=read("regions.csv"),
                external_parities=read("rent_parities.csv"), classification=classification,
                groups=config["groups"], labels=config["labels"],
                missing_parities=config["missing_parities"])


def test_compute_files_equal_command_line_files(demo_run, demo_cli_run):
    # Every output but the run-specific two is the command line's file byte for byte.
    written = sorted(os.path.relpath(os.path.join(d, f), demo_cli_run)
                     for d, _, fs in os.walk(demo_cli_run) for f in fs)
    assert sorted(demo_run.files) == written
    for name in written:
        if name not in RUN_SPECIFIC:
            assert demo_run.files[name].encode() == read_bytes(demo_cli_run / name), name


def test_parities_frame_has_the_columns_and_values_of_parities_csv(demo_run, demo_cli_run):
    from_file = pd.read_csv(demo_cli_run / "parities.csv", dtype=str, keep_default_na=False)
    assert list(demo_run.parities.columns) == list(from_file.columns)
    # Each number read back prints as the file's text (round trip, computed here).
    exact = paritas.read_table((demo_cli_run / "parities.csv").read_text())
    pdt.assert_frame_equal(demo_run.parities, exact, check_exact=True)
    assert demo_run.parities["region"].tolist() == from_file["region"].tolist()


def test_matrix_is_a_region_by_region_frame(demo_run):
    root = demo_run.matrices["all"]
    assert list(root.index) == list(root.columns)
    assert len(root) == 16
    # Cell (a, b) = 100 x parity(b) / parity(a): the diagonal is 100 and
    # (a, b) x (b, a) = 10,000 (reversal), to rounding of the last bit.
    for a in root.index:
        assert abs(root.loc[a, a] - 100.0) < 1e-12
        for b in root.index:
            assert abs(root.loc[a, b] * root.loc[b, a] - 1e4) < 1e-9


def test_warnings_and_record(demo_run, demo_cli_run):
    warnings_csv = paritas.read_table((demo_cli_run / "warnings.csv").read_text())
    assert [w.text for w in demo_run.warnings] == warnings_csv["message"].tolist()
    assert demo_run.record["command"] == "compute"
    assert demo_run.record["exit_code"] == 0


def test_survey_as_frames_gives_the_command_line_parities_bit_for_bit(demo_cli_run):
    run = paritas.compute(**demo_frames(), matrices="all")
    for name in ["parities.csv", "contributions.csv", "matrix/all.csv", "bilateral/all.csv",
                 "matrix/food.csv", "dispersion.csv"]:
        assert run.files[name].encode() == read_bytes(demo_cli_run / name), name


def test_check_report_equals_command_line(tmp_path):
    code, out, _ = run_cli("check", DEMO_CONFIG)
    result = paritas.check(DEMO_CONFIG)
    assert code == 0 and result.usable
    assert result.report == out
    assert len(result.headings) == 29


def test_pair_equals_command_line_csv(tmp_path):
    csv = tmp_path / "pair.csv"
    code, _, err = run_cli("pair", DEMO_CONFIG, "--from", "vel", "--to", "cap", "--csv", str(csv))
    assert code == 0, err
    result = paritas.pair(DEMO_CONFIG, "vel", "cap")
    assert result.csv.encode() == read_bytes(csv)
    assert result.measures.set_index("measure").loc["to", "value"] == "cap"


def test_deflate_frame_equals_command_line_file(tmp_path, demo_cli_run):
    wages_path = os.path.join(DEMO_DATA, "wages.csv")
    out = tmp_path / "wages_real.csv"
    code, _, err = run_cli("deflate", "--parities", str(demo_cli_run), "--input", wages_path,
                           "--output", str(out), "--value-column", "hourly_wage",
                           "--value-column", "annual_earnings")
    assert code == 0, err
    wages = pd.read_csv(wages_path, dtype={"record_id": str, "region": str, "occupation": str},
                        float_precision="round_trip")
    result = paritas.deflate(wages, demo_cli_run, ["hourly_wage", "annual_earnings"])
    expected = pd.read_csv(out, dtype={"record_id": str, "region": str, "occupation": str},
                           float_precision="round_trip")
    pdt.assert_frame_equal(result, expected, check_exact=True)
    assert result.attrs["columns_added"] == ["hourly_wage_real", "annual_earnings_real"]


def test_deflate_by_a_compute_result_equals_by_its_folder(demo_run, demo_cli_run):
    frame = pd.DataFrame({"region": ["cap", "vel"], "income": [1000.0, 1000.0]},
                         index=["a", "b"])
    by_result = paritas.deflate(frame, demo_run, ["income"])
    by_folder = paritas.deflate(frame, demo_cli_run, ["income"])
    pdt.assert_frame_equal(by_result, by_folder, check_exact=True)
    # Real income = income / (parity / 100), computed here from the parities frame.
    root = demo_run.parities[demo_run.parities["node"] == "all"].set_index("region")
    assert by_result["income_real"].tolist() == [
        float(f"{1000.0 / (root.loc[r, 'parity'] / 100):.17g}") for r in ["cap", "vel"]]


def test_sensitivity_tables_equal_command_line(tmp_path):
    out = tmp_path / "out"
    code, _, err = run_cli("sensitivity", DEMO_CONFIG, "--output", str(out), "--replicates", "20",
                           "--parts", "bootstrap,leave-one-out")
    assert code == 0, err
    result = paritas.sensitivity(DEMO_CONFIG, replicates=20, parts=["bootstrap", "leave-one-out"])
    for name in ["bootstrap.csv", "leave_one_out.csv", "warnings.csv"]:
        assert result.files[name].encode() == read_bytes(out / "sensitivity" / name), name
    assert "bootstrap.csv" in result.tables


def test_sensitivity_interval_keyword_equals_command_line_and_is_recorded(tmp_path):
    out = tmp_path / "out"
    code, _, err = run_cli("sensitivity", DEMO_CONFIG, "--output", str(out), "--replicates", "20",
                           "--parts", "bootstrap", "--interval", "percentile")
    assert code == 0, err
    result = paritas.sensitivity(DEMO_CONFIG, replicates=20, parts=["bootstrap"],
                                 interval="Percentile")
    assert result.files["bootstrap.csv"].encode() == read_bytes(out / "sensitivity" /
                                                                "bootstrap.csv")
    assert result.record["sensitivity"]["settings"]["interval"] == "percentile"
    assert result.tables["bootstrap.csv"]["interval_df"].isna().all()
    default = paritas.sensitivity(DEMO_CONFIG, replicates=20, parts=["bootstrap"])
    assert default.record["sensitivity"]["settings"]["interval"] == "expanded"
    assert default.tables["bootstrap.csv"]["interval_df"].notna().any()
    code, _, err = run_cli("sensitivity", DEMO_CONFIG, "--output", str(out), "--interval", "wide")
    with pytest.raises(paritas.InvalidInput) as caught:
        paritas.sensitivity(DEMO_CONFIG, replicates=20, interval="wide")
    assert code == 1
    assert str(caught.value) == "interval must be one of: expanded, percentile; found 'wide'"


def test_deflate_takes_a_parities_folder_relative_to_the_working_folder(demo_cli_run, monkeypatch):
    frame = pd.DataFrame({"region": ["cap"], "income": [1000.0]})
    by_absolute = paritas.deflate(frame, demo_cli_run, ["income"])
    monkeypatch.chdir(demo_cli_run.parent)
    by_relative = paritas.deflate(frame, demo_cli_run.name, ["income"])
    pdt.assert_frame_equal(by_relative, by_absolute, check_exact=True)


def test_compare_tables_equal_command_line_files(tmp_path, demo_cli_run):
    # The demo against itself under another aggregation method.
    other = tmp_path / "gk"
    paritas.compute(DEMO_CONFIG, aggregation="geary-khamis", write=True, output=str(other))
    out = tmp_path / "cmp"
    code, _, err = run_cli("compare", str(demo_cli_run), str(other), "--output", str(out))
    assert code == 0, err
    result = paritas.compare(demo_cli_run, other)
    for name, frame in [("changes.csv", result.changes), ("drivers.csv", result.drivers)]:
        pdt.assert_frame_equal(frame, paritas.read_table((out / name).read_text()),
                               check_exact=True)
    assert len(result.changes) > 0


def test_compare_of_a_folder_that_is_no_run_raises_invalid_input(tmp_path, demo_cli_run):
    code, _, err = run_cli("compare", str(demo_cli_run), str(tmp_path))
    with pytest.raises(paritas.InvalidInput) as caught:
        paritas.compare(demo_cli_run, tmp_path)
    assert code == 1
    assert err == "paritas: error: " + str(caught.value) + "\n"


# ---------------------------------------------------------------------------
# Numeric results as numpy arrays over the library's memory.

def exact_parities(demo_cli_run):
    return paritas.read_table((demo_cli_run / "parities.csv").read_text())


def test_parity_array_equals_parities_csv_bit_for_bit(demo_run, demo_cli_run):
    arrays = demo_run.arrays
    table = exact_parities(demo_cli_run)
    assert arrays.parity.shape == (len(arrays.nodes), len(arrays.regions))
    assert arrays.parity.dtype == np.float64
    rows = [arrays.nodes.index(n) for n in table["node"]]
    cols = [arrays.regions.index(r) for r in table["region"]]
    # Every (node, region) row of the file, the array's value to the bit
    # (the file writes the shortest text that reads back, read back exactly).
    assert np.array_equal(arrays.parity[rows, cols], table["parity"].to_numpy(), equal_nan=True)
    # Cells the file has no row for hold no parity.
    listed = np.zeros(arrays.parity.shape, dtype=bool)
    listed[rows, cols] = True
    assert np.isnan(arrays.parity[~listed]).all()


def test_matrix_arrays_and_frames_equal_matrix_csv_bit_for_bit(demo_run, demo_cli_run):
    arrays = demo_run.arrays
    files = sorted(f[:-4] for f in os.listdir(demo_cli_run / "matrix"))
    assert sorted(arrays.matrices) == files  # the demo's codes need no escaping
    for node, view in arrays.matrices.items():
        exact = paritas.read_table((demo_cli_run / "matrix" / f"{node}.csv").read_text(),
                                   index_col=0)
        assert arrays.matrix_regions[node] == list(exact.index)
        assert np.array_equal(view, exact.to_numpy())
        pdt.assert_frame_equal(demo_run.matrices[node], exact, check_exact=True)


def test_arrays_are_views_not_copies(demo_run):
    arrays = demo_run.arrays
    # Two accesses give the same memory; the matrix frame is a view of it.
    assert demo_run.arrays.parity is arrays.parity
    root = arrays.matrices["all"]
    assert not root.flags.owndata and not arrays.parity.flags.owndata
    frame = demo_run.matrices["all"]
    assert np.shares_memory(frame.to_numpy(), root)
    assert np.shares_memory(frame.values, demo_run.matrices["all"].values)
    # The base of every array is the one capsule holding the library's result.
    assert type(root.base).__name__ == "PyCapsule"
    assert root.base is arrays.parity.base


def test_arrays_are_read_only(demo_run):
    arrays = demo_run.arrays
    for view in [arrays.parity, arrays.matrices["all"]]:
        assert not view.flags.writeable
        with pytest.raises(ValueError, match="read-only"):
            view[0, 0] = 1.0
        with pytest.raises(ValueError):
            view.flags.writeable = True
    with pytest.raises(ValueError, match="read-only"):
        demo_run.matrices["all"].iloc[0, 0] = 1.0


def test_arrays_outlive_the_result(demo_cli_run):
    run = paritas.compute(DEMO_CONFIG, matrices="all")
    parity, food = run.arrays.parity, run.arrays.matrices["food"]
    del run
    gc.collect()
    for _ in range(3):  # reuse the freed memory, were it freed
        paritas.compute(DEMO_CONFIG, matrices="all", report=False)
    table = exact_parities(demo_cli_run)
    root = table[table["node"] == "all"]["parity"].to_numpy()
    assert np.array_equal(parity[0][~np.isnan(parity[0])], root)
    exact = paritas.read_table((demo_cli_run / "matrix" / "food.csv").read_text(), index_col=0)
    assert np.array_equal(food, exact.to_numpy())


def test_sensitivity_arrays_equal_its_files_bit_for_bit():
    result = paritas.sensitivity(DEMO_CONFIG, replicates=20, parts=["bootstrap"],
                                 write_replicates=True)
    arrays = result.arrays
    table = paritas.read_table(result.files["bootstrap.csv"])
    rows = [arrays.nodes.index(n) for n in table["node"]]
    cols = [arrays.regions.index(r) for r in table["region"]]
    for name in ["parity", "median", "lower", "upper", "log_se"]:
        view = getattr(arrays, name)
        assert not view.flags.writeable and not view.flags.owndata, name
        assert np.array_equal(view[rows, cols], table[name].to_numpy(), equal_nan=True), name
    # replicates.bin: a 24-byte header (magic, nodes, regions, B, 0), then
    # little-endian doubles in node, region, replicate order.
    raw = result.files["replicates.bin"]
    shape = tuple(int.from_bytes(raw[8 + 4 * k:12 + 4 * k], "little") for k in range(3))
    assert arrays.replicates.shape == shape == (len(arrays.nodes), len(arrays.regions), 20)
    from_file = np.frombuffer(raw[24:], dtype="<f8").reshape(shape)
    assert np.array_equal(arrays.replicates, from_file, equal_nan=True)
    assert np.shares_memory(arrays.replicates, result.arrays.replicates)
    assert arrays.replicates.base is arrays.median.base


def test_sensitivity_arrays_of_parts_not_run_are_none():
    result = paritas.sensitivity(DEMO_CONFIG, replicates=2, parts=["leave-one-out"])
    assert result.arrays.median is None and result.arrays.replicates is None
    assert result.arrays.parity is not None
