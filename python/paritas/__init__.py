"""Regional purchasing power parities from a price survey, from Python.

The jobs of the paritas command line, run by its C++ library in this process:

    import paritas
    run = paritas.compute("data/demo/config.yaml")
    run.parities          # DataFrame, the columns of parities.csv
    run.warnings          # list of paritas.RunWarning
    run.record            # the run record (run.json) as a dict

Keyword options take the configuration's key names (reference, elementary,
aggregation, invalid_rows, threads, matrices, ...) and override the file.
Invalid input raises paritas.InvalidInput, a failed computation
paritas.ComputationFailed; both carry the library's message and, where the
library gives them, file, line, column, key and value. Ctrl-C stops a long
sensitivity run between replicates and raises KeyboardInterrupt.

This package only converts: tables arrive as the text of the files the
command line writes (the same writer, exact numbers) and are read into
DataFrames here; every number comes from the library. The numeric results
also arrive as read-only numpy arrays over the library's own memory
(run.arrays): no copy, kept alive by the arrays themselves.
"""

from __future__ import annotations

import io
import json
import os
import re
import tempfile
from dataclasses import dataclass, field
from typing import Any, Dict, List, Optional, Sequence, Union

import numpy as np
import pandas as pd

from . import _paritas

__version__ = _paritas.__version__

__all__ = [
    "ParitasError", "InvalidInput", "ComputationFailed", "RunWarning",
    "CheckResult", "ComputeResult", "PairResult", "SensitivityResult",
    "CompareResult", "ComputeArrays", "SensitivityArrays", "check", "compute", "pair", "deflate", "sensitivity", "compare",
    "read_table",
]

# Columns that hold codes or text in the library's tables: read as strings so
# that a code such as "01" or "NA" stays as written.
_TEXT_COLUMNS = {
    "node", "kind", "region", "label", "warnings", "from", "to", "heading", "item",
    "measure", "file", "reason", "raw", "text", "source", "valued_at",
    "elementary", "aggregation", "method", "part", "name", "region_name",
}

# The library's location prefix: "path:line: " or "path:line:column: ".
_LOCATION = re.compile(r"^(?P<file>[^\n]+?):(?P<line>\d+)(?::(?P<column>\d+))?: ")


class ParitasError(Exception):
    """A job of the library did not finish; str() is the library's message.

    Attributes:
        message: the library's message, as the command line prints it.
        frame, row_label: for a survey given as DataFrames, the frame
            ("prices", "prices[1]", "expenditure", ...) and the index label of
            the first rejected row; None otherwise.
        file, line, column: where the problem is. For a configuration
            error, the library's own parts: the configuration's path and the
            1-based line and column of the key or value at fault (line and
            column None where the reader has no place, e.g. a file that
            cannot be read). Otherwise the first rejected row, or the
            location the message starts with; None when not about a place.
        key, value: the setting at fault and the text found: a keyword
            option, or a configuration key as a dotted path
            ("survey.prices.delimiter", "checks.min_items"; an unknown key
            as written, its value being what was written under it); None
            when the problem is not about one setting. A survey given as
            DataFrames runs from a generated "config.yaml" holding its
            sections; file, line and column then point into that file, as
            the message does.
        rejected_rows: DataFrame of the rejected rows (file, line, reason,
            raw), empty when the stop was not about rows.
        exit_code: the command line's exit code for the same failure.
    """

    def __init__(self, outcome: Dict[str, Any]):
        self.message: str = outcome["message"]
        self.exit_code: int = outcome["exit_code"]
        rows = outcome.get("rejected_rows", [])
        self.rejected_rows = _rejected_frame(rows)
        # For a survey given as DataFrames: the frame and row label of the
        # first rejected row.
        self.frame: Optional[str] = rows[0].get("frame") if rows else None
        self.row_label: Any = rows[0].get("row_label") if rows else None
        self.rejections: str = outcome.get("rejections", "")
        self.key: Optional[str] = outcome.get("key") or None
        self.value: Optional[str] = outcome.get("value") or None
        self.file: Optional[str] = None
        self.line: Optional[int] = None
        self.column: Optional[int] = None
        located = _LOCATION.match(rows[0]["reason"] if rows else self.message)
        if outcome.get("line") is not None:  # the configuration reader's parts
            self.file, self.line = outcome["file"], outcome["line"]
            self.column = outcome["column"]
        elif located:
            self.file = located["file"]
            self.line = int(located["line"])
            self.column = int(located["column"]) if located["column"] else None
        elif outcome.get("file"):
            self.file = outcome["file"]
        super().__init__(self.message)


class InvalidInput(ParitasError):
    """Invalid input, configuration or option (command line exit code 1)."""


class ComputationFailed(ParitasError):
    """The computation failed on valid input (command line exit code 2)."""


@dataclass(frozen=True)
class RunWarning:
    """One warning of a run, as listed in warnings.csv."""

    kind: str
    node: str
    region: str
    text: str


def _rejected_frame(rows: List[Dict[str, Any]]) -> pd.DataFrame:
    columns = ["file", "line", "reason", "raw"]
    if rows and "frame" in rows[0]:
        columns = ["frame", "row_label"] + columns
    return pd.DataFrame(rows, columns=columns)


def _raise_unless_ok(outcome: Dict[str, Any]) -> Dict[str, Any]:
    if outcome["ok"]:
        return outcome
    if outcome["exit_code"] == 2:
        raise ComputationFailed(outcome)
    raise InvalidInput(outcome)


def read_table(text: str, index_col: Optional[int] = None) -> pd.DataFrame:
    """Reads one of the library's CSV tables into a DataFrame, exactly.

    Numbers read back to the same doubles (round-trip parsing); code and text
    columns stay strings; an empty cell is NaN (a missing number) or "".
    """
    header = next(iter(text.splitlines()), "").split(",")
    dtypes = {name: str for name in header if name in _TEXT_COLUMNS}
    if index_col is not None:
        dtypes[header[index_col]] = str
    frame = pd.read_csv(io.StringIO(text), dtype=dtypes, keep_default_na=False,
                        na_values=[""], float_precision="round_trip", index_col=index_col)
    for name, kind in dtypes.items():
        if name in frame.columns and kind is str:
            frame[name] = frame[name].fillna("")
    return frame


def _warnings(outcome: Dict[str, Any]) -> List[RunWarning]:
    return [RunWarning(**w) for w in outcome.get("warnings", [])]


@dataclass
class CheckResult:
    """What `check` finds: usable or not, each heading's structure, and the
    warnings compute will raise."""

    usable: bool
    message: str
    report: str
    headings: pd.DataFrame
    warnings: List[RunWarning]
    rejected_rows: pd.DataFrame


@dataclass
class ComputeArrays:
    """A compute run's numbers as read-only numpy arrays (float64, NaN where
    a region has no parity), over memory the library filled: no copy is made
    when they are handed out, every access returns the same arrays, and they
    stay valid after the result is deleted (each array keeps that memory
    alive). Writing to them raises ValueError: they are the run's numbers.

    Attributes:
        parity: nodes x regions, the parity column of parities.csv (reference
            = 100). The library holds one vector per node; this matrix is
            assembled from them once, in C++, when the run returns.
        nodes: node codes, the rows of `parity` (classification order,
            groups last).
        regions: region codes, the columns of `parity` (survey order).
        matrices: node code -> region x region array of matrix/<node>.csv
            (cell (a, b) = 100 x parity(b) / parity(a)), computed by the
            library for the nodes whose matrix file the run makes.
        matrix_regions: node code -> the region codes of that matrix's rows
            and columns (the regions with a parity at the node).
    """

    parity: np.ndarray
    nodes: List[str]
    regions: List[str]
    matrices: Dict[str, np.ndarray]
    matrix_regions: Dict[str, List[str]]


@dataclass
class SensitivityArrays:
    """A sensitivity run's node x region results as read-only numpy arrays
    over the library's result (no copy; valid after the result is deleted;
    writing raises ValueError). None for a part that did not run.

    Attributes:
        nodes, regions: codes of the rows and columns.
        parity: full-sample parity (reference = 100).
        median, lower, upper: the bootstrap replicates' median parity and
            interval ends (the columns of bootstrap.csv).
        log_se: bootstrap standard error of ln parity.
        replicates: node x region x replicate ln parities (replicates.bin's
            values), with write_replicates=True; None otherwise.
    """

    nodes: List[str]
    regions: List[str]
    parity: Optional[np.ndarray]
    median: Optional[np.ndarray]
    lower: Optional[np.ndarray]
    upper: Optional[np.ndarray]
    log_se: Optional[np.ndarray]
    replicates: Optional[np.ndarray]


def _compute_arrays(given: Dict[str, Any]) -> ComputeArrays:
    matrices = {node: view for node, (view, _) in given["matrices"].items()}
    regions = {node: codes for node, (_, codes) in given["matrices"].items()}
    return ComputeArrays(parity=given["parity"], nodes=given["nodes"], regions=given["regions"],
                         matrices=matrices, matrix_regions=regions)


def _matrix_frame(view: np.ndarray, regions: List[str]) -> pd.DataFrame:
    """A region x region DataFrame over `view` itself: one float64 block,
    which pandas keeps as the array given (copy=False), so no copy."""
    return pd.DataFrame(view, index=pd.Index(regions, name="region", dtype=object),
                        columns=pd.Index(regions, dtype=object), copy=False)


@dataclass
class ComputeResult:
    """The outputs of a compute run as DataFrames and numpy arrays.

    Which frames are views and which copies: `matrices` are views over the
    read-only arrays of `arrays` (one float64 block each, which pandas keeps
    without copying). The other frames mix text and number columns, so
    pandas stores each kind in blocks of its own; they are read from the
    files' exact text (a copy) rather than assembled from the library's
    vectors column by column (also a copy).

    Attributes:
        parities: parities.csv (node x region rows, the same columns).
        contributions, outliers, dispersion: the files of the same names.
        matrices: node code -> region x region DataFrame (matrix/<node>.csv's
            numbers, bit for bit), for the nodes the `matrices` option names
            (default the root); a view of arrays.matrices[node], read-only.
        bilaterals: node code -> DataFrame (bilateral/<node>.csv).
        warnings: every warning, in listing order.
        record: run.json as a dict.
        report: what the command line prints.
        files: every output file's name -> its text, exactly as written.
        arrays: the numbers as read-only numpy arrays (ComputeArrays).
    """

    parities: pd.DataFrame
    contributions: pd.DataFrame
    outliers: pd.DataFrame
    dispersion: pd.DataFrame
    matrices: Dict[str, pd.DataFrame]
    bilaterals: Dict[str, pd.DataFrame]
    warnings: List[RunWarning]
    record: Dict[str, Any]
    report: str
    files: Dict[str, str] = field(repr=False)
    exit_code: int = 0
    arrays: Optional[ComputeArrays] = field(default=None, repr=False)

    def table(self, name: str) -> pd.DataFrame:
        """Returns any output table by file name, e.g. "real_by_heading.csv"."""
        return read_table(self.files[name])


@dataclass
class PairResult:
    """Two regions compared at one node: the pair CSV as a DataFrame
    (measure, value; values as text, as they mix codes and numbers)."""

    measures: pd.DataFrame
    table: str
    csv: str


@dataclass
class SensitivityResult:
    """A sensitivity run's tables: file name (relative to the sensitivity
    folder) -> DataFrame (read from the files' text), plus warnings, the run
    record, the report and the node x region results as read-only numpy
    arrays over the library's memory (arrays, SensitivityArrays)."""

    tables: Dict[str, pd.DataFrame]
    warnings: List[RunWarning]
    record: Dict[str, Any]
    report: str
    files: Dict[str, str] = field(repr=False)
    arrays: Optional[SensitivityArrays] = field(default=None, repr=False)


def _path(config: Union[str, os.PathLike]) -> str:
    return os.fspath(config)


# The survey tables a job can take as DataFrames, in the configuration's words.
_FRAME_ROLES = ("prices", "expenditure", "regions", "items", "external_parities")
# Sections of the configuration given as dicts or YAML text beside frames.
_SECTIONS = ("classification", "groups", "labels", "missing_parities", "checks", "limits")


class _Frames:
    """A survey given as DataFrames, laid out as a configuration folder.

    Each frame is written without its index as `<role>.csv` (several price
    frames as prices.csv, prices_2.csv, ...) beside a config.yaml naming them,
    and the job runs from inside that folder: the library reads, validates
    and reports exactly as for files, so messages are the command line's on
    the same data ("prices.csv:5:3: price '-4.1' is not a positive number").
    The row labels of each rejected row are looked up from its line here.
    """

    def __init__(self, frames: Dict[str, Any], sections: Dict[str, Any]):
        import yaml  # Debian's python3-yaml; only needed for frames
        self._folder = tempfile.TemporaryDirectory(prefix="paritas-")
        self.folder = self._folder.name
        self.labels: Dict[str, tuple] = {}  # file name -> (frame name, row labels, start lines)
        config: Dict[str, Any] = {"survey": {}}
        for role in _FRAME_ROLES:
            given = frames.get(role)
            if given is None:
                continue
            many = role == "prices" and isinstance(given, (list, tuple))
            names = []
            for i, frame in enumerate(given if many else [given]):
                if not isinstance(frame, pd.DataFrame):
                    raise TypeError(f"{role} must be a pandas DataFrame, found {type(frame).__name__}")
                file_name = role + ("" if i == 0 else f"_{i + 1}") + ".csv"
                text = frame.to_csv(index=False, lineterminator="\n")
                with open(os.path.join(self.folder, file_name), "w", encoding="utf-8") as f:
                    f.write(text)
                frame_name = role if not many else f"{role}[{i}]"
                self.labels[file_name] = (frame_name, list(frame.index), _record_lines(text))
                names.append(file_name)
            config["survey"][role] = names if many else names[0]
        for key in _SECTIONS:
            value = sections.get(key)
            if value is not None:
                config[key] = yaml.safe_load(value) if isinstance(value, str) else value
        with open(os.path.join(self.folder, "config.yaml"), "w", encoding="utf-8") as f:
            yaml.safe_dump(config, f, sort_keys=False, allow_unicode=True)

    def run(self, job, *args):
        """Runs a library job on config.yaml from inside the folder."""
        cwd = os.getcwd()
        os.chdir(self.folder)
        try:
            return job("config.yaml", *args)
        finally:
            os.chdir(cwd)

    def label_rows(self, rows: List[Dict[str, Any]]) -> None:
        """Adds `frame` and `row_label` to each rejected row of a frame."""
        for row in rows:
            frame_name, labels, starts = self.labels.get(row["file"], (None, [], []))
            position = _position_of(starts, row["line"])
            row["frame"] = frame_name
            row["row_label"] = labels[position] if position is not None else None

    def close(self) -> None:
        self._folder.cleanup()


def _record_lines(text: str) -> List[int]:
    """Returns the 1-based line on which each data record of CSV text starts
    (a quoted field may hold line breaks)."""
    starts: List[int] = []
    line, quoted, record_start = 1, False, True
    for ch in text:
        if record_start:
            if line > 1:
                starts.append(line)
            record_start = False
        if ch == '"':
            quoted = not quoted
        elif ch == "\n":
            line += 1
            record_start = not quoted
    return starts


def _position_of(starts: List[int], line: int) -> Optional[int]:
    import bisect
    i = bisect.bisect_left(starts, line)
    return i if i < len(starts) and starts[i] == line else None


def _run(job, config, frames: Dict[str, Any], options: Dict[str, Any], *args) -> Dict[str, Any]:
    """Runs a job on a configuration path, or on frames (and sections)."""
    given = {k: v for k, v in frames.items() if v is not None}
    sections = {k: given.pop(k) for k in _SECTIONS if k in given}
    if config is not None:
        if given or sections:
            raise TypeError("give either a configuration path or survey frames, not both")
        return _raise_unless_ok(job(_path(config), options, *args))
    if "prices" not in given or "expenditure" not in given:
        raise TypeError("without a configuration path, prices= and expenditure= frames are needed")
    if "output" in options:  # the job runs inside the frames' folder
        options = dict(options, output=os.path.abspath(options["output"]))
    survey = _Frames(given, sections)
    try:
        outcome = survey.run(job, options, *args)
        survey.label_rows(outcome.get("rejected_rows", []))
        return _raise_unless_ok(outcome)
    finally:
        survey.close()


def check(config: Union[str, os.PathLike, None] = None, *, prices: Union[pd.DataFrame, Sequence[pd.DataFrame], None] = None,
        expenditure: Optional[pd.DataFrame] = None, regions: Optional[pd.DataFrame] = None,
        items: Optional[pd.DataFrame] = None, external_parities: Optional[pd.DataFrame] = None,
        classification: Union[Dict[str, Any], str, None] = None,
        groups: Union[Dict[str, Any], str, None] = None, labels: Optional[Dict[str, str]] = None,
        missing_parities: Optional[Dict[str, Any]] = None,
        checks: Optional[Dict[str, Any]] = None, limits: Optional[Dict[str, Any]] = None,
          **options: Any) -> CheckResult:
    """Validates a survey and describes its structure (`paritas check`).

    Args:
        config: path of the run configuration (YAML), or None with frames.
        prices, expenditure, regions, items, external_parities: the survey
            as DataFrames instead of a configuration (columns as the files';
            prices may be a list of frames, read in order as several price
            files). prices and expenditure are required.
        classification, groups, labels, missing_parities, checks, limits:
            the configuration sections of those names beside frames, as dicts
            or YAML text.
        **options: configuration keys overriding the file (reference,
            elementary, aggregation, invalid_rows, threads, ...).

    Raises:
        InvalidInput: the configuration or a file is invalid; the message and
            the rejected rows are the command line's.
    """
    outcome = _run(_paritas.check, config, dict(prices=prices, expenditure=expenditure, regions=regions, items=items,
                 external_parities=external_parities, classification=classification,
                 groups=groups, labels=labels, missing_parities=missing_parities,
                 checks=checks, limits=limits), options)
    return CheckResult(
        usable=outcome["usable"], message=outcome["message"], report=outcome["report"],
        headings=pd.DataFrame(outcome["headings"]), warnings=_warnings(outcome),
        rejected_rows=_rejected_frame(outcome["rejected_rows"]))


def compute(config: Union[str, os.PathLike, None] = None, *, prices: Union[pd.DataFrame, Sequence[pd.DataFrame], None] = None,
        expenditure: Optional[pd.DataFrame] = None, regions: Optional[pd.DataFrame] = None,
        items: Optional[pd.DataFrame] = None, external_parities: Optional[pd.DataFrame] = None,
        classification: Union[Dict[str, Any], str, None] = None,
        groups: Union[Dict[str, Any], str, None] = None, labels: Optional[Dict[str, str]] = None,
        missing_parities: Optional[Dict[str, Any]] = None,
        checks: Optional[Dict[str, Any]] = None, limits: Optional[Dict[str, Any]] = None,
            write: bool = False, **options: Any) -> ComputeResult:
    """Computes parities (`paritas compute`) and returns its outputs as DataFrames.

    Args:
        config: path of the run configuration (YAML), or None with frames.
        prices, expenditure, regions, items, external_parities: the survey
            as DataFrames instead of a configuration (columns as the files';
            prices may be a list of frames, read in order as several price
            files). prices and expenditure are required.
        classification, groups, labels, missing_parities, checks, limits:
            the configuration sections of those names beside frames, as dicts
            or YAML text.
        write: also write the output folder, as the command line does
            (default False: nothing is written).
        **options: configuration keys overriding the file: output, reference,
            elementary, aggregation, invalid_rows, duplicate_quotes, threads,
            matrices, report, strict, report_region, outlier_threshold,
            representative_weight, robust_errors, outlier_fit.

    Raises:
        InvalidInput: invalid configuration, option or rows (message as the
            command line's).
        ComputationFailed: the parities could not be computed.
    """
    outcome = _run(_paritas.compute, config, dict(prices=prices, expenditure=expenditure, regions=regions, items=items,
                 external_parities=external_parities, classification=classification,
                 groups=groups, labels=labels, missing_parities=missing_parities,
                 checks=checks, limits=limits), options, write)
    files: Dict[str, str] = outcome["files"]
    arrays = _compute_arrays(outcome["arrays"])
    matrices = {node: _matrix_frame(view, arrays.matrix_regions[node])
                for node, view in arrays.matrices.items()}
    bilaterals = {}
    for name, text in files.items():
        folder, _, base = name.partition("/")
        if folder == "bilateral":
            bilaterals[_node_of(base)] = read_table(text)
    return ComputeResult(
        parities=read_table(files["parities.csv"]),
        contributions=read_table(files["contributions.csv"]),
        outliers=read_table(files["outliers.csv"]),
        dispersion=read_table(files["dispersion.csv"]),
        matrices=matrices, bilaterals=bilaterals, warnings=_warnings(outcome),
        record=json.loads(files["run.json"]), report=outcome["report"], files=files,
        exit_code=outcome["exit_code"], arrays=arrays)


def _node_of(file_name: str) -> str:
    # NodeFileName writes bytes other than [A-Za-z0-9._-] as %XX.
    from urllib.parse import unquote
    return unquote(file_name[:-4] if file_name.endswith(".csv") else file_name)


def pair(config: Union[str, os.PathLike, None], from_region: str, to_region: str, *,
         node: str = "", every_method: bool = False, prices: Union[pd.DataFrame, Sequence[pd.DataFrame], None] = None,
        expenditure: Optional[pd.DataFrame] = None, regions: Optional[pd.DataFrame] = None,
        items: Optional[pd.DataFrame] = None, external_parities: Optional[pd.DataFrame] = None,
        classification: Union[Dict[str, Any], str, None] = None,
        groups: Union[Dict[str, Any], str, None] = None, labels: Optional[Dict[str, str]] = None,
        missing_parities: Optional[Dict[str, Any]] = None,
        checks: Optional[Dict[str, Any]] = None, limits: Optional[Dict[str, Any]] = None,
         **options: Any) -> PairResult:
    """Compares two regions at one node (`paritas pair`).

    Args:
        config: path of the run configuration, or None with frames.
        from_region, to_region: region codes; to_region is priced against
            from_region.
        node: classification or group code (default "" = the root).
        every_method: also the pair's transitive parity under every method of
            the node's family (one compute per method).
        prices, expenditure, ...: the survey as frames, as for compute().
        **options: configuration keys, as for compute().
    """
    outcome = _run(_paritas.pair, config, dict(prices=prices, expenditure=expenditure, regions=regions, items=items,
                 external_parities=external_parities, classification=classification,
                 groups=groups, labels=labels, missing_parities=missing_parities,
                 checks=checks, limits=limits), options,
                   from_region, to_region, node, every_method)
    measures = pd.read_csv(io.StringIO(outcome["csv"]), dtype=str, keep_default_na=False)
    return PairResult(measures=measures, table=outcome["table"], csv=outcome["csv"])


def deflate(frame: pd.DataFrame, parities: Union[str, os.PathLike, ComputeResult],
            value_columns: Sequence[str], *, region_column: str = "region", node: str = "",
            node_column: str = "", invalid_rows: str = "stop", allow_negative: bool = False,
            include_parity: bool = False, include_interval: bool = False,
            decimals: int = -1, name: str = "frame") -> pd.DataFrame:
    """Deflates money columns of a DataFrame by regional parities (`paritas deflate`).

    The frame is handed to the library as the CSV file `<name>.csv` (without
    its index), so row messages read "<name>.csv:<line>:<column>: ...", line 2
    being the frame's first row. Returns the frame with the columns
    `<value>_real` (and parity, intervals) added, read back exactly.

    Args:
        frame: one row per unit, with a region column and the value columns.
        parities: a compute output folder, or a ComputeResult.
        value_columns: names of the money columns to deflate.
        region_column, node, node_column, invalid_rows, allow_negative,
        include_parity, include_interval, decimals: as the command line's
            options of the same names (README, "deflate").
        name: file name the rows are reported under.

    Raises:
        InvalidInput: a bad option or row; under invalid_rows="skip" bad rows
            are left out instead (listed in the returned frame's
            attrs["rejected_rows"]).
    """
    with tempfile.TemporaryDirectory(prefix="paritas-") as folder:
        if isinstance(parities, ComputeResult):
            parities_dir = os.path.join(folder, "run")
            os.mkdir(parities_dir)
            with open(os.path.join(parities_dir, "parities.csv"), "w", encoding="utf-8") as f:
                f.write(parities.files["parities.csv"])
        else:
            parities_dir = os.path.abspath(os.fspath(parities))  # the call runs in `folder`
        input_path = os.path.join(folder, name + ".csv")
        # repr-exact floats: pandas writes the shortest text that reads back.
        frame.to_csv(input_path, index=False)
        output_path = os.path.join(folder, name + "_deflated.csv")
        cwd = os.getcwd()
        os.chdir(folder)  # messages name the file as given: "<name>.csv"
        try:
            outcome = _raise_unless_ok(_paritas.deflate({
                "parities_dir": parities_dir, "input_path": name + ".csv",
                "output_path": name + "_deflated.csv", "region_column": region_column,
                "value_columns": list(value_columns), "node": node,
                "node_column": node_column, "invalid_rows": invalid_rows,
                "allow_negative": allow_negative, "include_parity": include_parity,
                "include_interval": include_interval, "decimals": decimals}))
        finally:
            os.chdir(cwd)
        result = pd.read_csv(output_path, dtype={c: frame[c].dtype for c in frame.columns
                                                  if c not in value_columns},
                             float_precision="round_trip")
    result.attrs["rejected_rows"] = pd.DataFrame(outcome["rejected_rows"],
                                                 columns=["file", "line", "reason", "raw"])
    result.attrs["columns_added"] = outcome["columns_added"]
    return result


def sensitivity(config: Union[str, os.PathLike, None] = None, *, prices: Union[pd.DataFrame, Sequence[pd.DataFrame], None] = None,
        expenditure: Optional[pd.DataFrame] = None, regions: Optional[pd.DataFrame] = None,
        items: Optional[pd.DataFrame] = None, external_parities: Optional[pd.DataFrame] = None,
        classification: Union[Dict[str, Any], str, None] = None,
        groups: Union[Dict[str, Any], str, None] = None, labels: Optional[Dict[str, str]] = None,
        missing_parities: Optional[Dict[str, Any]] = None,
        checks: Optional[Dict[str, Any]] = None, limits: Optional[Dict[str, Any]] = None,
                replicates: int = 500, seed: int = 1,
                level: float = 95, coverage: Sequence[float] = (90, 75, 50, 25),
                repetitions: int = 20, parts: Optional[Sequence[str]] = None,
                bootstrap: str = "rescaled", node: str = "", write_replicates: bool = False,
                write: bool = False, interval: str = "expanded",
                **options: Any) -> SensitivityResult:
    """Runs the sensitivity analysis (`paritas sensitivity`).

    Releases the GIL and uses the library's threads; Ctrl-C stops the run
    between bootstrap replicates (or between parts) and raises
    KeyboardInterrupt, writing nothing.

    Args:
        config: path of the run configuration, or None with frames.
        prices, expenditure, ...: the survey as frames, as for compute().
        replicates: bootstrap replicates, 2 to 100,000.
        seed: seed of the resampling.
        level: interval level in percent (95) or as a share (0.95), at most 99.9 %.
        coverage: percentages of each heading's items kept in the coverage curve.
        repetitions: random subsamples per coverage level.
        parts: among "bootstrap", "leave-one-out", "coverage", "methods"
            (default all).
        bootstrap: "rescaled" or "plain".
        interval: "expanded" (percentiles widened for the degrees of freedom
            of the items, the default) or "percentile".
        node: node of the printed table (default the root).
        write_replicates: keep every replicate (replicates.bin).
        write: also write <output>/sensitivity as the command line does.
        **options: configuration keys, as for compute().
    """
    run = {"replicates": replicates, "seed": seed, "level": level,
           "coverage": list(coverage), "repetitions": repetitions, "bootstrap": bootstrap,
           "node": node, "write_replicates": write_replicates, "interval": interval}
    if parts is not None:
        run["parts"] = list(parts)
    outcome = _run(_paritas.sensitivity, config, dict(prices=prices, expenditure=expenditure, regions=regions, items=items,
                 external_parities=external_parities, classification=classification,
                 groups=groups, labels=labels, missing_parities=missing_parities,
                 checks=checks, limits=limits), options, run, write)
    files: Dict[str, str] = outcome["files"]
    tables = {name: read_table(text) for name, text in files.items() if name.endswith(".csv")}
    return SensitivityResult(tables=tables, warnings=_warnings(outcome),
                             record=json.loads(files["run.json"]), report=outcome["report"],
                             files=files, arrays=SensitivityArrays(**outcome["arrays"]))


@dataclass
class CompareResult:
    """Two compute runs compared (`paritas compare`): changes.csv and
    drivers.csv as DataFrames, and the summary the command prints."""

    changes: pd.DataFrame
    drivers: pd.DataFrame
    table: str


def compare(old: Union[str, os.PathLike], new: Union[str, os.PathLike], *, node: str = "",
            top: int = 10, z: float = 1.96) -> CompareResult:
    """Compares two output folders of compute (`paritas compare`); writes nothing.

    Args:
        old, new: output folders of the earlier and the later run
            (compute(..., write=True) or the command line).
        node: node of the printed summary (default "" = the root).
        top: regions listed in the summary, 1 to 1000.
        z: multiplier of the combined standard error beyond which a change
            counts as larger than the runs' uncertainty (default 1.96).

    Raises:
        InvalidInput: a folder is not a run of compute, or an option is out of range.
    """
    outcome = _raise_unless_ok(_paritas.compare(os.fspath(old), os.fspath(new), node, top, z))
    return CompareResult(changes=read_table(outcome["changes"]),
                         drivers=read_table(outcome["drivers"]), table=outcome["table"])
