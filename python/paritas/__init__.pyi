# Type stubs of the package paritas (python/paritas/__init__.py): what editors
# and type checkers see. Docstrings are in the module itself (help(paritas)).
import os
from typing import Any, Dict, List, Optional, Sequence, Union

import numpy as np
import pandas as pd

__version__: str

_Path = Union[str, os.PathLike[str]]
_Section = Union[Dict[str, Any], str, None]

class ParitasError(Exception):
    message: str
    exit_code: int
    file: Optional[str]
    line: Optional[int]
    column: Optional[int]
    key: Optional[str]
    value: Optional[str]
    frame: Optional[str]
    row_label: Any
    rejected_rows: pd.DataFrame
    rejections: str

class InvalidInput(ParitasError): ...
class ComputationFailed(ParitasError): ...

class RunWarning:
    kind: str
    node: str
    region: str
    text: str
    def __init__(self, kind: str, node: str, region: str, text: str) -> None: ...

class CheckResult:
    usable: bool
    message: str
    report: str
    headings: pd.DataFrame
    warnings: List[RunWarning]
    rejected_rows: pd.DataFrame

class ComputeArrays:
    parity: np.ndarray
    nodes: List[str]
    regions: List[str]
    matrices: Dict[str, np.ndarray]
    matrix_regions: Dict[str, List[str]]

class SensitivityArrays:
    nodes: List[str]
    regions: List[str]
    parity: Optional[np.ndarray]
    median: Optional[np.ndarray]
    lower: Optional[np.ndarray]
    upper: Optional[np.ndarray]
    log_se: Optional[np.ndarray]
    replicates: Optional[np.ndarray]

class ComputeResult:
    parities: pd.DataFrame
    contributions: pd.DataFrame
    outliers: pd.DataFrame
    dispersion: pd.DataFrame
    matrices: Dict[str, pd.DataFrame]
    bilaterals: Dict[str, pd.DataFrame]
    warnings: List[RunWarning]
    record: Dict[str, Any]
    report: str
    files: Dict[str, str]
    exit_code: int
    arrays: ComputeArrays
    def table(self, name: str) -> pd.DataFrame: ...

class PairResult:
    measures: pd.DataFrame
    table: str
    csv: str

class SensitivityResult:
    tables: Dict[str, pd.DataFrame]
    warnings: List[RunWarning]
    record: Dict[str, Any]
    report: str
    files: Dict[str, Union[str, bytes]]
    arrays: SensitivityArrays

def read_table(text: str, index_col: Optional[int] = ...) -> pd.DataFrame: ...

def check(
    config: Optional[_Path] = ...,
    *,
    prices: Union[pd.DataFrame, Sequence[pd.DataFrame], None] = ...,
    expenditure: Optional[pd.DataFrame] = ...,
    regions: Optional[pd.DataFrame] = ...,
    items: Optional[pd.DataFrame] = ...,
    external_parities: Optional[pd.DataFrame] = ...,
    classification: _Section = ...,
    groups: _Section = ...,
    labels: Optional[Dict[str, str]] = ...,
    missing_parities: Optional[Dict[str, Any]] = ...,
    checks: Optional[Dict[str, Any]] = ...,
    limits: Optional[Dict[str, Any]] = ...,
    output: str = ...,
    reference: str = ...,
    elementary: str = ...,
    aggregation: str = ...,
    invalid_rows: str = ...,
    duplicate_quotes: str = ...,
    threads: int = ...,
    matrices: Union[str, Sequence[str]] = ...,
    report: bool = ...,
    strict: bool = ...,
    report_region: str = ...,
    outlier_threshold: float = ...,
    representative_weight: float = ...,
    robust_errors: str = ...,
    outlier_fit: str = ...,
) -> CheckResult: ...

def compute(
    config: Optional[_Path] = ...,
    *,
    prices: Union[pd.DataFrame, Sequence[pd.DataFrame], None] = ...,
    expenditure: Optional[pd.DataFrame] = ...,
    regions: Optional[pd.DataFrame] = ...,
    items: Optional[pd.DataFrame] = ...,
    external_parities: Optional[pd.DataFrame] = ...,
    classification: _Section = ...,
    groups: _Section = ...,
    labels: Optional[Dict[str, str]] = ...,
    missing_parities: Optional[Dict[str, Any]] = ...,
    checks: Optional[Dict[str, Any]] = ...,
    limits: Optional[Dict[str, Any]] = ...,
    write: bool = ...,
    output: str = ...,
    reference: str = ...,
    elementary: str = ...,
    aggregation: str = ...,
    invalid_rows: str = ...,
    duplicate_quotes: str = ...,
    threads: int = ...,
    matrices: Union[str, Sequence[str]] = ...,
    report: bool = ...,
    strict: bool = ...,
    report_region: str = ...,
    outlier_threshold: float = ...,
    representative_weight: float = ...,
    robust_errors: str = ...,
    outlier_fit: str = ...,
) -> ComputeResult: ...

def pair(
    config: Optional[_Path],
    from_region: str,
    to_region: str,
    *,
    node: str = ...,
    every_method: bool = ...,
    prices: Union[pd.DataFrame, Sequence[pd.DataFrame], None] = ...,
    expenditure: Optional[pd.DataFrame] = ...,
    regions: Optional[pd.DataFrame] = ...,
    items: Optional[pd.DataFrame] = ...,
    external_parities: Optional[pd.DataFrame] = ...,
    classification: _Section = ...,
    groups: _Section = ...,
    labels: Optional[Dict[str, str]] = ...,
    missing_parities: Optional[Dict[str, Any]] = ...,
    checks: Optional[Dict[str, Any]] = ...,
    limits: Optional[Dict[str, Any]] = ...,
    **options: Any,
) -> PairResult: ...

def deflate(
    frame: pd.DataFrame,
    parities: Union[_Path, ComputeResult],
    value_columns: Sequence[str],
    *,
    region_column: str = ...,
    node: str = ...,
    node_column: str = ...,
    invalid_rows: str = ...,
    allow_negative: bool = ...,
    include_parity: bool = ...,
    include_interval: bool = ...,
    decimals: int = ...,
    name: str = ...,
) -> pd.DataFrame: ...

def sensitivity(
    config: Optional[_Path] = ...,
    *,
    prices: Union[pd.DataFrame, Sequence[pd.DataFrame], None] = ...,
    expenditure: Optional[pd.DataFrame] = ...,
    regions: Optional[pd.DataFrame] = ...,
    items: Optional[pd.DataFrame] = ...,
    external_parities: Optional[pd.DataFrame] = ...,
    classification: _Section = ...,
    groups: _Section = ...,
    labels: Optional[Dict[str, str]] = ...,
    missing_parities: Optional[Dict[str, Any]] = ...,
    checks: Optional[Dict[str, Any]] = ...,
    limits: Optional[Dict[str, Any]] = ...,
    replicates: int = ...,
    seed: int = ...,
    level: float = ...,
    coverage: Sequence[float] = ...,
    repetitions: int = ...,
    parts: Optional[Sequence[str]] = ...,
    bootstrap: str = ...,
    node: str = ...,
    write_replicates: bool = ...,
    write: bool = ...,
    interval: str = ...,
    **options: Any,
) -> SensitivityResult: ...

class CompareResult:
    changes: pd.DataFrame
    drivers: pd.DataFrame
    table: str

def compare(
    old: _Path,
    new: _Path,
    *,
    node: str = ...,
    top: int = ...,
    z: float = ...,
) -> CompareResult: ...
