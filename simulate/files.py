"""Files in and out: the one owner of reading input files and of writing outputs safely.

Outputs
-------
cyclecheck writes five kinds of file, and an existing file is replaced only by a file of the
same kind that cyclecheck wrote, unless the user says ``force``. The kind is read from the
file's content (its first bytes; a Parquet file's footer), never guessed from its name:

========== ============================================================================
kind       how a file of that kind written by cyclecheck is recognised
========== ============================================================================
result     JSON whose top object holds ``"document": "cyclecheck-result"``
page       HTML whose second line is the page marker (:data:`cyclecheck.reports.MARKER`)
log        CSV whose first line is exactly :data:`LOG_HEADER` (``simulate --trace``, the
           probe), or that followed by ``,replication`` (the probe's replications);
           Parquet whose footer metadata holds :data:`PARQUET_MARK` (the probe)
table      CSV whose first line starts with :data:`TABLE_HEADER_START` (``sweep --csv``)
state      JSON whose top object holds ``"document": "cyclecheck-sweep-state"``
           (``sweep --resume``)
========== ============================================================================

A new file whose name ends in the suffix of another kind (a page named ``x.json``, a result
named ``x.html``) is refused too: swapped options are the usual cause.

Every output is written atomically: the text goes to a temporary file in the same folder,
which is flushed to disk and renamed over the target, so a reader never sees half a file and a
failure leaves the old file as it was. :func:`write_outputs` writes the outputs of one command
together: all paths are checked first, then the renames happen with Ctrl-C held back, so the
outputs appear together or not at all.

Inputs
------
:func:`read_input` reads a model file, a table, an event log or a result document and refuses,
naming the file, what cannot be one (missing, a folder, unreadable, binary, not UTF-8).
"""

from __future__ import annotations

import contextlib
import json
import os
import signal
import tempfile
import threading
from collections.abc import Iterator, Sequence
from pathlib import Path
from typing import Any

from ..reports.schema import DOCUMENT_KIND
from .errors import ArgumentError, ModelError

__all__ = [
    "KINDS",
    "LOG_HEADER",
    "PARQUET_MARK",
    "STATE_DOCUMENT",
    "TABLE_HEADER_START",
    "Output",
    "check_output",
    "kind_of",
    "load_document",
    "read_input",
    "write_outputs",
]

#: The kinds of output and the words messages use for them.
KINDS = {"result": "a cyclecheck result document", "page": "a cyclecheck review page",
         "log": "a cyclecheck event log", "table": "a cyclecheck sweep table",
         "state": "a cyclecheck sweep state file"}
#: File-name suffixes that announce each kind (a new file named for another kind is refused).
SUFFIXES = {"result": (".json",), "page": (".html", ".htm"), "log": (".csv", ".parquet"),
            "table": (".csv",), "state": (".json",)}
#: First line of the event logs cyclecheck writes (``,replication`` may follow).
LOG_HEADER = "transition,firing,start,time"
#: Key and value of the footer metadata of the Parquet event logs cyclecheck writes.
PARQUET_MARK = (b"cyclecheck", b"event log")
#: Start of the first line of the sweep tables cyclecheck writes.
TABLE_HEADER_START = "point,"
#: The value of ``"document"`` in the state files of resumable sweeps.
STATE_DOCUMENT = "cyclecheck-sweep-state"

PathLike = str | os.PathLike[str]


# --------------------------------------------------------------------------- reading


def read_input(path: PathLike, what: str) -> tuple[bytes, str]:
    """Bytes and text (UTF-8, byte-order mark removed) of an input file.

    Parameters
    ----------
    path : str or path-like
    what : str
        What the file should be, for messages: ``"TOML model file"``, ``"event log"``.

    Raises
    ------
    ModelError
        Naming the file: missing, a folder, unreadable, binary (NUL bytes) or not UTF-8 (with
        the line of the first bad byte).
    """
    path = Path(path)
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


def load_document(path: PathLike) -> dict[str, Any]:
    """Read a saved result document (JSON), checking that it is one.

    Raises
    ------
    ModelError
        When the file cannot be read, is not JSON, or is not a cyclecheck result document.
    """
    _, text = read_input(path, "result document (JSON)")
    try:
        doc = json.loads(text)
    except json.JSONDecodeError as err:
        raise ModelError(f"is not valid JSON: {err.msg}", file=path,
                         item=f"line {err.lineno}, column {err.colno}") from None
    if not isinstance(doc, dict) or doc.get("document") != DOCUMENT_KIND:
        raise ModelError(f'is not a cyclecheck result document (no "document": '
                         f'"{DOCUMENT_KIND}")', file=path)
    return doc


# --------------------------------------------------------------------------- kinds


def kind_of(path: PathLike) -> str | None:
    """The kind of output a file is, read from its first bytes; None for any other file."""
    try:
        with open(path, "rb") as handle:
            head = handle.read(4096)
    except OSError:
        return None
    if head.startswith(b"PAR1"):
        return "log" if _marked_parquet(path) else None
    text = head.decode("utf-8", errors="replace").lstrip("\ufeff")
    lines = text.splitlines()
    first = lines[0] if lines else ""
    from ..reports.page import MARKER

    if first == "<!DOCTYPE html>" and len(lines) > 1 and lines[1].startswith(MARKER):
        return "page"
    if text.lstrip().startswith("{") and f'"document": "{DOCUMENT_KIND}"' in text:
        return "result"
    if text.lstrip().startswith("{") and f'"document": "{STATE_DOCUMENT}"' in text:
        return "state"
    if first.rstrip("\r") in (LOG_HEADER, f"{LOG_HEADER},replication"):
        return "log"
    if first.startswith(TABLE_HEADER_START):
        return "table"
    return None


def _marked_parquet(path: PathLike) -> bool:
    """A Parquet file whose footer metadata holds :data:`PARQUET_MARK`."""
    import pyarrow as pa
    import pyarrow.parquet as pq

    try:
        meta = pq.read_schema(path).metadata or {}
    except (pa.ArrowException, OSError, ValueError):
        return False
    key, value = PARQUET_MARK
    return meta.get(key) == value


def _suffix_kind(path: Path, kind: str) -> str | None:
    """Another kind whose suffix this path has (and the kind's own suffixes don't include)."""
    suffix = path.suffix.lower()
    if suffix in SUFFIXES[kind]:
        return None
    for other, suffixes in SUFFIXES.items():
        if other != kind and suffix in suffixes:
            return other
    return None


def check_output(path: PathLike, kind: str, *, force: bool = False, option: str = "") -> Path:
    """Check, before any work, that an output of ``kind`` may be written at ``path``.

    Raises
    ------
    ModelError
        When the folder does not exist, the path is a folder, the name announces another
        kind, or the file exists and is not an earlier output of the same kind (without
        ``force``). The message names the option (``--report``) and the file.
    """
    if kind not in KINDS:
        raise ArgumentError(f"kind must be one of {sorted(KINDS)}, got {kind!r}")
    path = Path(path)
    item = option or None
    if path.is_dir():
        raise ModelError("is a folder; give a file name for the output", file=path, item=item)
    folder = path.parent if str(path.parent) else Path(".")
    if not folder.is_dir():
        raise ModelError(f"cannot be written: the folder {folder} does not exist", file=path,
                         item=item)
    if force:
        return path
    if path.exists():
        found = kind_of(path)
        if found != kind:
            now = KINDS[found] if found else "not a cyclecheck output"
            raise ModelError(f"exists and is {now}; it is left untouched (write {KINDS[kind]} "
                             "elsewhere, or use --force to replace it)", file=path, item=item)
        return path
    named = _suffix_kind(path, kind)
    if named is not None:
        raise ModelError(f"the name says {KINDS[named]} ({path.suffix}) but this output is "
                         f"{KINDS[kind]}; were two options swapped? Use another name, or "
                         "--force", file=path, item=item)
    return path


# --------------------------------------------------------------------------- writing


class Output:
    """One output of a command: where, of which kind, and its content (text or bytes)."""

    __slots__ = ("content", "kind", "option", "path")

    def __init__(self, path: PathLike, kind: str, content: str | bytes = "",
                 option: str = "") -> None:
        self.path = Path(path)
        self.kind = kind
        self.content = content
        self.option = option


@contextlib.contextmanager
def _interrupt_deferred() -> Iterator[None]:
    """Hold Ctrl-C back while files are renamed into place. A Ctrl-C that came meanwhile is
    dropped: by then the run is complete and written."""
    if threading.current_thread() is not threading.main_thread():
        yield
        return
    caught: list[object] = []
    previous = signal.signal(signal.SIGINT, lambda *args: caught.append(args))
    try:
        yield
    finally:
        signal.signal(signal.SIGINT, previous)


def _temporary(output: Output) -> str:
    """Write the content to a temporary file beside the target; return its name."""
    path = output.path
    umask = os.umask(0)
    os.umask(umask)
    data = output.content.encode("utf-8") if isinstance(output.content, str) else output.content
    try:
        fd, tmp = tempfile.mkstemp(prefix=f".{path.name}.", suffix=".tmp", dir=path.parent)
    except OSError as err:
        raise ModelError(f"cannot be written: {err.strerror}", file=path) from None
    try:
        with os.fdopen(fd, "wb") as handle:
            handle.write(data)
            handle.flush()
            os.fsync(handle.fileno())
        # a plain open's permissions (0666 less the umask), not the 0600 of a temporary file
        os.chmod(tmp, 0o666 & ~umask)
    except BaseException as err:
        Path(tmp).unlink(missing_ok=True)
        if isinstance(err, OSError):
            raise ModelError(f"cannot be written: {err.strerror or err}", file=path) from None
        raise
    return tmp


def check_outputs(outputs: Sequence[Output], *, force: bool = False) -> None:
    """:func:`check_output` for each, and no path given twice."""
    seen: dict[Path, str] = {}
    for out in outputs:
        check_output(out.path, out.kind, force=force, option=out.option)
        key = out.path.resolve()
        if key in seen:
            raise ModelError(f"is given for both {seen[key]} and {out.option or out.kind}; "
                             "give two files", file=out.path)
        seen[key] = out.option or out.kind


def _keep_old(path: Path) -> str | None:
    """A hard link to the file at ``path`` (if any) beside it, to restore it on failure."""
    if not path.exists():
        return None
    backup = tempfile.mktemp(prefix=f".{path.name}.", suffix=".old", dir=path.parent)
    try:
        os.link(path, backup)
    except OSError:  # no hard links here: the rename stays atomic, only the rollback is lost
        return None
    return backup


def write_outputs(outputs: Sequence[Output], *, force: bool = False) -> list[Path]:
    """Write the outputs of one command atomically and together.

    Everything is checked again first (a file may have appeared since the run began); then
    each content goes to a temporary file, and the renames happen with Ctrl-C held back. If
    a rename fails, the outputs renamed before it are rolled back (the old files restored, new
    ones removed), so the outputs appear together or not at all.

    Returns
    -------
    list of pathlib.Path
        The paths written, in order.
    """
    check_outputs(outputs, force=force)
    temporaries: list[str] = []
    backups: list[str | None] = []
    try:
        for out in outputs:
            temporaries.append(_temporary(out))
        with _interrupt_deferred():
            done: list[Output] = []
            try:
                for out, tmp in zip(outputs, temporaries, strict=True):
                    backups.append(_keep_old(out.path))
                    os.replace(tmp, out.path)
                    done.append(out)
            except OSError as err:
                for out, backup in zip(done, backups, strict=False):
                    if backup is not None:
                        os.replace(backup, out.path)
                    else:
                        out.path.unlink(missing_ok=True)
                failed = outputs[len(done)].path
                raise ModelError(f"cannot be written: {err.strerror or err}; no output of "
                                 "this run was written", file=failed) from None
    finally:
        for leftover in [*temporaries, *backups]:
            if leftover is not None:
                Path(leftover).unlink(missing_ok=True)
    return [out.path for out in outputs]
