"""Validation messages arrive as exceptions of our own classes with the
command line's text, and with the structured fields (file, line, column, key,
value; frame and row label for DataFrames)."""

import pandas as pd
import pytest

import paritas
from conftest import DEMO_CONFIG, run_cli

# A tiny survey: two regions, one heading, two items; line 4 of prices.csv
# (row label "q3" in the frame) holds a negative price.
PRICES = "region,item,price\na,x,2.0\nb,x,3.0\na,y,-4.1\nb,y,5.0\n"
EXPENDITURE = "region,heading,expenditure\na,h,100\nb,h,200\n"
ITEMS = "item,heading\nx,h\ny,h\n"
CONFIG = "survey:\n  prices: prices.csv\n  expenditure: expenditure.csv\n  items: items.csv\n"
MESSAGE = "prices.csv:4:3: price '-4.1' is not a positive number"


def tiny_folder(tmp_path):
    for name, text in [("prices.csv", PRICES), ("expenditure.csv", EXPENDITURE),
                       ("items.csv", ITEMS), ("config.yaml", CONFIG)]:
        (tmp_path / name).write_text(text)
    return tmp_path


def tiny_frames():
    prices = pd.DataFrame({"region": ["a", "b", "a", "b"], "item": ["x", "x", "y", "y"],
                           "price": [2.0, 3.0, -4.1, 5.0]}, index=["q1", "q2", "q3", "q4"])
    expenditure = pd.DataFrame({"region": ["a", "b"], "heading": ["h", "h"],
                                "expenditure": [100, 200]})
    items = pd.DataFrame({"item": ["x", "y"], "heading": ["h", "h"]})
    return dict(prices=prices, expenditure=expenditure, items=items)


def cli_error(tmp_path):
    code, _, err = run_cli("compute", "config.yaml", cwd=tiny_folder(tmp_path))
    assert code == 1
    return err


def test_bad_row_from_files_raises_invalid_input_with_the_command_line_text(tmp_path, monkeypatch):
    err = cli_error(tmp_path)
    monkeypatch.chdir(tmp_path)
    with pytest.raises(paritas.InvalidInput) as caught:
        paritas.compute("config.yaml")
    e = caught.value
    assert MESSAGE in e.rejected_rows["reason"].tolist()
    assert (e.file, e.line, e.column) == ("prices.csv", 4, 3)
    assert "paritas: error: " + str(e) in err
    assert MESSAGE in err


def test_bad_row_from_a_frame_names_the_frame_and_row_label(tmp_path):
    err = cli_error(tmp_path)
    with pytest.raises(paritas.InvalidInput) as caught:
        paritas.compute(**tiny_frames())
    e = caught.value
    # The same text as the command line on the same rows.
    assert "paritas: error: " + str(e) in err
    assert (e.frame, e.row_label) == ("prices", "q3")
    row = e.rejected_rows.iloc[0]
    assert (row["frame"], row["row_label"], row["reason"]) == ("prices", "q3", MESSAGE)


def test_skip_policy_leaves_the_row_out_and_lists_it():
    result = paritas.check(**tiny_frames(), invalid_rows="skip")
    assert result.rejected_rows["reason"].tolist() == [MESSAGE]
    assert result.rejected_rows["row_label"].tolist() == ["q3"]


def test_unknown_method_names_the_key_and_value():
    with pytest.raises(paritas.InvalidInput) as caught:
        paritas.compute(DEMO_CONFIG, aggregation="geks-fisherr")
    e = caught.value
    assert (e.key, e.value) == ("aggregation", "geks-fisherr")
    assert str(e).startswith("aggregation 'geks-fisherr' is not one of: ")
    assert str(e).endswith("; did you mean 'geks-fisher'?")


def test_unknown_option_suggests_the_nearest():
    with pytest.raises(paritas.InvalidInput) as caught:
        paritas.compute(DEMO_CONFIG, refrence="cap")
    assert str(caught.value) == "unknown option 'refrence'; did you mean 'reference'?"


def test_unknown_reference_region_is_the_command_lines_message(tmp_path):
    code, _, err = run_cli("compute", DEMO_CONFIG, "--reference", "nowhere", "--output",
                           str(tmp_path / "out"))
    with pytest.raises(paritas.InvalidInput) as caught:
        paritas.compute(DEMO_CONFIG, reference="nowhere")
    assert code == 1
    assert err == "paritas: error: " + str(caught.value) + "\n"


def test_missing_config_file(tmp_path):
    code, _, err = run_cli("compute", str(tmp_path / "none.yaml"))
    with pytest.raises(paritas.InvalidInput) as caught:
        paritas.compute(tmp_path / "none.yaml")
    assert code == 1
    assert err == "paritas: error: " + str(caught.value) + "\n"


def test_deflate_bad_value_row_names_the_frame_file(tmp_path, demo_cli_run):
    frame = pd.DataFrame({"region": ["cap", "zz"], "income": [10.0, 20.0]})
    with pytest.raises(paritas.InvalidInput) as caught:
        paritas.deflate(frame, demo_cli_run, ["income"], name="incomes")
    assert caught.value.rejected_rows["reason"].tolist()[0].startswith("incomes.csv:3:1: ")


def test_unlinked_heading_raises_computation_failed_with_the_command_line_text(tmp_path):
    # Regions a, b price only x and c, d only y: the heading's two groups
    # share no item, so their parities are not identified.
    (tmp_path / "prices.csv").write_text(
        "region,item,price\na,x,1.0\nb,x,2.0\nc,y,3.0\nd,y,4.0\n")
    (tmp_path / "expenditure.csv").write_text(
        "region,heading,expenditure\na,h,1\nb,h,1\nc,h,1\nd,h,1\n")
    (tmp_path / "items.csv").write_text(ITEMS)
    (tmp_path / "config.yaml").write_text(CONFIG)
    code, _, err = run_cli("compute", "config.yaml", cwd=tmp_path)
    with pytest.raises(paritas.ComputationFailed) as caught:
        paritas.compute(tmp_path / "config.yaml")
    assert code == 2
    assert err == "paritas: error: " + str(caught.value) + "\n"
    assert str(caught.value).startswith(
        "heading 'h' is not linked: its regions fall into 2 groups that share no item: ")
    assert caught.value.exit_code == 2


# ---------------------------------------------------------------------------
# Configuration errors carry the reader's parts: the configuration's path,
# the 1-based line and column of the key or value at fault, the key as a
# dotted path and the text found. Line and column are counted by hand below.

SURVEY = "survey:\n  prices: prices.csv\n  expenditure: expenditure.csv\n  items: items.csv\n"


def config_error(tmp_path, monkeypatch, text):
    """Raises the error of config.yaml holding `text`; checks the command
    line prints the same message."""
    tiny_folder(tmp_path)
    (tmp_path / "config.yaml").write_text(text)
    code, _, err = run_cli("compute", "config.yaml", cwd=tmp_path)
    monkeypatch.chdir(tmp_path)
    with pytest.raises(paritas.InvalidInput) as caught:
        paritas.compute("config.yaml")
    e = caught.value
    assert code == 1
    assert err == "paritas: error: " + str(e) + "\n"
    return e


def fields(e):
    return (e.file, e.line, e.column, e.key, e.value)


def test_config_unknown_key_names_its_dotted_path_and_value(tmp_path, monkeypatch):
    # Line 6 "  min_itemz: 3": the key starts in column 3.
    e = config_error(tmp_path, monkeypatch, SURVEY + "checks:\n  min_itemz: 3\n")
    assert str(e) == ("config.yaml:6:3: unknown key 'checks.min_itemz'; "
                      "did you mean 'checks.min_items'?")
    assert fields(e) == ("config.yaml", 6, 3, "checks.min_itemz", "3")


def test_config_bad_enum_value_names_the_key_and_value(tmp_path, monkeypatch):
    # "survey.prices[0].delimiter" on line 4: "      delimiter: '|'", the
    # quoted value starts in column 18.
    e = config_error(tmp_path, monkeypatch,
                     "survey:\n  prices:\n    - path: prices.csv\n      delimiter: '|'\n"
                     "  expenditure: expenditure.csv\n  items: items.csv\n")
    assert str(e) == "config.yaml:4:18: survey.prices[0].delimiter '|' is not one of: ',', ';', tab"
    assert fields(e) == ("config.yaml", 4, 18, "survey.prices[0].delimiter", "|")


def test_config_bad_number_names_the_key_and_value(tmp_path, monkeypatch):
    # Line 5 "outlier_threshold: 3,5": the value starts in column 20.
    e = config_error(tmp_path, monkeypatch, SURVEY + "outlier_threshold: 3,5\n")
    assert str(e) == "config.yaml:5:20: 'outlier_threshold' must be a number, found '3,5'"
    assert fields(e) == ("config.yaml", 5, 20, "outlier_threshold", "3,5")


def test_config_list_where_a_single_value_belongs_has_no_value_text(tmp_path, monkeypatch):
    e = config_error(tmp_path, monkeypatch, SURVEY + "threads: [1, 2]\n")
    assert str(e) == "config.yaml:5:10: 'threads' must be a single value"
    assert fields(e) == ("config.yaml", 5, 10, "threads", None)


def test_missing_config_file_names_the_path_only(tmp_path):
    with pytest.raises(paritas.InvalidInput) as caught:
        paritas.compute(tmp_path / "none.yaml")
    path = str(tmp_path / "none.yaml")
    assert str(caught.value) == path + ": cannot open file: No such file or directory"
    assert fields(caught.value) == (path, None, None, None, None)


def test_bad_value_in_a_section_given_beside_frames_names_the_key(tmp_path):
    # The frames' generated config.yaml holds survey (prices, expenditure,
    # items: lines 1-4) and then checks (line 5), min_items on line 6.
    with pytest.raises(paritas.InvalidInput) as caught:
        paritas.compute(**tiny_frames(), checks={"min_items": "many"})
    e = caught.value
    assert str(e) == "config.yaml:6:14: 'checks.min_items' must be a number, found 'many'"
    assert fields(e) == ("config.yaml", 6, 14, "checks.min_items", "many")
