r"""The CSV tables of a model file: reading them with pandas (vectorized checks), and writing them.

The ``[[transitions]]`` and ``[[places]]`` entries of the TOML file and each CSV table are read
into rows (:class:`_Rows`) that :func:`cyclecheck.simulate.modelfile.load_model` joins and
checks as a whole; the file reading that both kinds of source share lives here too.

CSV tables
----------
``transitions_csv`` has the columns ``id`` (required), ``duration`` and ``label``; ``places_csv``
has ``from``, ``to`` (required), ``tokens``, ``hold`` and ``label``. A missing optional column
means the default for every row. A ``duration`` or ``hold`` cell is a number or a distribution in
cell syntax, ``name(key=value, ...)`` with TOML values, quoted because it contains commas::

    from,to,tokens,hold
    fill,cap,0,1.5
    cap,fill,3,"gamma(mean=3, cv=0.5)"
    cap,cap,1,"empirical(values=[0.5, 0.7, 1.1])"

Cells are stripped of surrounding blanks; an empty number cell is an error (write 0), an empty
label is no label; blank lines are skipped. Line numbers in messages count every line of the file
from 1 (header included) and assume no quoted cell spans several lines.
"""

from __future__ import annotations

import csv
import io
import json
import os
import re
from collections.abc import Callable, Sequence
from dataclasses import dataclass
from pathlib import Path
from typing import TYPE_CHECKING, Any

import numpy as np

from .durations import Distribution, SpecTable, parse_spec
from .errors import ModelError, did_you_mean, shown

if TYPE_CHECKING:
    import pandas as pd

__all__ = ["write_csv_model"]

MAX_TOKENS = 2**53  # integers up to here survive the float64 of a CSV column exactly


# --------------------------------------------------------------------------- files


def _read_file(path: Path, what: str) -> tuple[bytes, str]:
    """Bytes and text of a file, or a ModelError saying why it cannot be a model file."""
    if not path.exists():
        raise ModelError(f"no such file ({what})", file=path)
    if path.is_dir():
        raise ModelError(f"is a directory, expected a {what}", file=path)
    try:
        data = path.read_bytes()
    except OSError as exc:
        raise ModelError(f"cannot be read: {exc.strerror or exc}", file=path) from None
    if b"\0" in data:
        raise ModelError(f"is a binary file (it contains NUL bytes), expected a {what}",
                         file=path)
    try:
        text = data.decode("utf-8")
    except UnicodeDecodeError as exc:
        line = data[: exc.start].count(b"\n") + 1
        raise ModelError(f"is not UTF-8 text (byte 0x{data[exc.start]:02x} at line {line}), "
                         f"expected a {what}; save it as UTF-8", file=path) from None
    return data, text.removeprefix("\ufeff")


# --------------------------------------------------------------------------- rows of one source


@dataclass
class _Rows:
    """Transitions or places read from one source: the TOML entries or one CSV table."""

    file: Path
    ids: np.ndarray  # transitions: their ids; places: the "from" ids
    dst: np.ndarray | None = None  # places: the "to" ids (None for transitions)
    tokens: np.ndarray | None = None
    labels: np.ndarray | None = None
    specs: SpecTable | None = None
    line: Callable[[int], int] | None = None  # CSV: row -> line number
    data: bytes = b""  # CSV: the file's bytes, for the digest

    def item(self, i: int) -> str:
        """How messages name element ``i`` of these rows."""
        if self.dst is None:
            what = f'transition "{self.ids[i]}"'
        else:
            what = f"place {self.ids[i]} -> {self.dst[i]}"
        if self.line is not None:
            return f"line {self.line(i)} ({what})"
        return what if self.dst is None else f"place {i + 1} ({self.ids[i]} -> {self.dst[i]})"


# --------------------------------------------------------------------------- CSV tables


def _csv_lines(text: str) -> Any:
    """Row index -> line number, computed only when a message needs one."""

    def line(row: int) -> int:
        lines = re.split(r"\r\n|\r|\n", text)
        filled = [i for i, s in enumerate(lines) if s.strip()]  # pandas skips blank lines
        return filled[row + 1] + 1 if row + 1 < len(filled) else len(lines)

    return line


def _read_csv(path: Path, required: tuple[str, ...], optional: tuple[str, ...],
              key: str, toml: Path) -> tuple[pd.DataFrame, Callable[[int], int], bytes]:
    import pandas as pd

    if not path.exists():
        raise ModelError(f"no such file (named by {key} in {toml})", file=path)
    data, text = _read_file(path, "CSV table")
    allowed = required + optional
    start = re.search(r"\S", text)
    line = len(re.findall(r"\r\n|\r|\n", text[: start.start()])) + 1 if start else 1

    def bad_header(rule: str) -> ModelError:
        return ModelError(rule, file=path, item=f"line {line}")

    first = re.compile(r"[^\r\n]*").match(text, start.start()).group() if start else ""
    try:
        header = [c.strip() for c in next(csv.reader([first]))] if first else []
    except csv.Error as exc:
        raise bad_header(f"cannot read the header: {exc}") from None

    if not header:
        raise bad_header(f"the first line must name the columns, e.g. {','.join(allowed)}")
    for name in header:
        if name not in allowed:
            raise bad_header(f'unknown column "{name}"{did_you_mean(name, allowed)} '
                             f'(columns: {", ".join(allowed)})')
        if header.count(name) > 1:
            raise bad_header(f'column "{name}" appears twice')
    for name in required:
        if name not in header:
            raise bad_header(f'missing column "{name}" (columns: {", ".join(allowed)})')
    strings = {c: str for c in ("id", "from", "to", "label") if c in header}
    try:
        df = pd.read_csv(io.BytesIO(data), dtype=strings, keep_default_na=False,
                         na_filter=False, skipinitialspace=True, encoding="utf-8-sig")
    except (pd.errors.ParserError, ValueError) as exc:
        msg = str(exc).strip().removeprefix("Error tokenizing data. C error: ")
        m = re.search(r"in line (\d+)", msg)
        raise ModelError(f"cannot read the CSV table: {msg} (quote cells that contain "
                         'commas, e.g. "gamma(mean=3, cv=0.5)")', file=path,
                         item=f"line {m.group(1)}" if m else None) from None
    df.columns = header
    return df, _csv_lines(text), data


def _column(df: pd.DataFrame, name: str) -> np.ndarray:
    """A text column as an object array ("" where the column or the cell is missing)."""
    if name not in df:
        return np.full(len(df), "", dtype=object)
    return df[name].fillna("").astype(str).to_numpy(dtype=object)


def _require(values: np.ndarray, name: str, fail: Any) -> None:
    empty = np.flatnonzero(values == "")
    if empty.size:
        fail(int(empty[0]), f"{name} is empty", empty.size)


def _finite_nonneg(values: np.ndarray, name: str, shown: Any, fail: Any) -> None:
    bad = np.flatnonzero(~np.isfinite(values) | (values < 0))
    if bad.size:
        r = int(bad[0])
        rule = "finite" if not np.isfinite(values[r]) else ">= 0"
        fail(r, f"{name} must be {rule}, got {shown(r)}", bad.size)


def _spec_column(df: pd.DataFrame, name: str, fail: Any) -> SpecTable:
    import pandas as pd

    if name not in df:
        return SpecTable(np.zeros(len(df)))
    col = df[name]
    if col.dtype.kind in "iuf":  # plain numbers only: the fast path
        values = col.to_numpy(dtype=np.float64)
        _finite_nonneg(values, name, lambda r: shown(float(values[r])), fail)
        return SpecTable(values + 0.0)
    text = col.astype(str).str.strip()
    values = pd.to_numeric(text, errors="coerce").to_numpy(dtype=np.float64)
    laws = np.isnan(values) & text.str.fullmatch(r"[A-Za-z_]\w*\s*\(.*\)").to_numpy(bool)
    empty = np.flatnonzero(~laws & (text == "").to_numpy(bool))
    if empty.size:
        fail(int(empty[0]), f"{name} is empty; write 0 for none", empty.size)
    nan_text = text.str.lower().isin(["nan", "+nan", "-nan"]).to_numpy(bool)
    junk = np.flatnonzero(~laws & np.isnan(values) & ~nan_text)
    if junk.size:
        r = int(junk[0])
        fail(r, f"{name} must be a number or a distribution such as gamma(mean=3, cv=0.5), "
                f"got {shown(text.iloc[r])}", junk.size)
    values = np.where(laws, 0.0, values)
    _finite_nonneg(values, name, lambda r: shown(text.iloc[r]), fail)
    codes = np.full(len(df), -1, dtype=np.int32)
    distinct: list[Distribution] = []
    rows = np.flatnonzero(laws)
    if rows.size:  # parse each distinct cell text once
        found, uniques = pd.factorize(text.iloc[rows])
        for u, cell in enumerate(uniques):
            try:
                distinct.append(parse_spec(cell))
            except ModelError as exc:
                fail(int(rows[np.argmax(found == u)]), f"{name}: {exc.rule}", 1)
        codes[rows] = found
    return SpecTable(values + 0.0, codes, distinct)


def _token_column(df: pd.DataFrame, fail: Any) -> np.ndarray:
    import pandas as pd

    if "tokens" not in df:
        return np.zeros(len(df), dtype=np.int64)
    col = df["tokens"]
    text = None if col.dtype.kind in "iuf" else col.astype(str).str.strip()
    values = (col.to_numpy(dtype=np.float64) if text is None
              else pd.to_numeric(text, errors="coerce").to_numpy(dtype=np.float64))
    with np.errstate(invalid="ignore"):
        bad = np.flatnonzero(~np.isfinite(values) | (values < 0) | (values > MAX_TOKENS)
                             | (values != np.floor(values)))
    if bad.size:
        r = int(bad[0])
        got = shown(text.iloc[r]) if text is not None else shown(col.iloc[r].item())
        fail(r, f"tokens must be an integer >= 0, got {got}", bad.size)
    return values.astype(np.int64)


def _failer(rows: _Rows) -> Callable[[int, str, int], None]:
    def fail(row: int, rule: str, count: int) -> None:
        more = f" ({count - 1} more rows like this)" if count > 1 else ""
        raise ModelError(rule + more, file=rows.file, item=rows.item(row))

    return fail


def _csv_transitions(path: Path, toml: Path) -> _Rows:
    df, line, data = _read_csv(path, ("id",), ("duration", "label"), "transitions_csv", toml)
    ids = df["id"].fillna("").astype(str).str.strip().to_numpy(dtype=object)
    rows = _Rows(path, ids, labels=_column(df, "label"), line=line, data=data)
    fail = _failer(rows)
    _require(ids, "id", fail)
    rows.specs = _spec_column(df, "duration", fail)
    return rows


def _csv_places(path: Path, toml: Path) -> _Rows:
    df, line, data = _read_csv(path, ("from", "to"), ("tokens", "hold", "label"), "places_csv",
                               toml)
    rows = _Rows(path, _column(df, "from"), _column(df, "to"), labels=_column(df, "label"),
                 line=line, data=data)
    fail = _failer(rows)
    _require(rows.ids, "from", fail)
    _require(rows.dst, "to", fail)
    rows.tokens = _token_column(df, fail)
    rows.specs = _spec_column(df, "hold", fail)
    return rows


# --------------------------------------------------------------------------- writing


def _cells(values: Any) -> Any:
    """Numbers stay numbers (written exactly by pandas); laws become their exact cell text."""
    arr = np.asarray(values, dtype=object) if not isinstance(values, np.ndarray) else values
    if arr.dtype != object:
        return np.asarray(arr, dtype=np.float64)
    if all(isinstance(v, (int, float, np.integer, np.floating)) and not isinstance(v, bool)
           for v in arr.tolist()):
        return arr.astype(np.float64)
    return [parse_spec(v).to_text() for v in arr.tolist()]


def write_csv_model(
    directory: str | os.PathLike[str],
    name: str,
    duration: Any,
    source: Any,
    target: Any,
    tokens: Any,
    hold: Any,
    *,
    ids: Sequence[str] | None = None,
    time_unit: str = "",
) -> Path:
    """Write a model as a TOML file and two CSV tables; return the TOML path.

    Used by tests and benchmarks to build large models. Transitions get the ids ``t0, t1, ...``
    unless ``ids`` is given; ``duration`` and ``hold`` may hold numbers or specs (laws, tables,
    cell text), written in cell syntax.

    Files: ``<stem>.toml``, ``<stem>_transitions.csv``, ``<stem>_places.csv`` in ``directory``
    (created if needed), where ``stem`` is ``name`` with characters other than letters,
    digits, ``-``, ``_`` and ``.`` replaced by ``_``.
    """
    import pandas as pd

    directory = Path(directory)
    directory.mkdir(parents=True, exist_ok=True)
    stem = re.sub(r"[^\w.-]", "_", name) or "model"
    n = len(duration)
    names = list(ids) if ids is not None else [f"t{i}" for i in range(n)]
    if len(names) != n:
        raise ValueError(f"ids must have {n} entries, got {len(names)}")
    table = np.array(names, dtype=object)
    t_csv, p_csv = f"{stem}_transitions.csv", f"{stem}_places.csv"
    pd.DataFrame({"id": table, "duration": _cells(duration)}).to_csv(
        directory / t_csv, index=False)
    pd.DataFrame({
        "from": table[np.asarray(source, dtype=np.int64)],
        "to": table[np.asarray(target, dtype=np.int64)],
        "tokens": np.asarray(tokens, dtype=np.int64),
        "hold": _cells(hold),
    }).to_csv(directory / p_csv, index=False)
    toml_path = directory / f"{stem}.toml"
    lines = ["[model]", f"name = {json.dumps(name)}"]
    if time_unit:
        lines.append(f"time_unit = {json.dumps(time_unit)}")
    lines += [f"transitions_csv = {json.dumps(t_csv)}", f"places_csv = {json.dumps(p_csv)}", ""]
    toml_path.write_text("\n".join(lines), encoding="utf-8")
    return toml_path
