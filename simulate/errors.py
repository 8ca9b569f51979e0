"""The errors of the application: bad input, and bad arguments to the library.

Every check of a model file, a CSV table, a distribution, an event log, an option or an output
path raises :class:`ModelError`, which carries the *file*, the *item* (the element, line or
option at fault) and the *rule* that is broken, so that the command line can print one clear
paragraph and exit with status 2, and library callers can read the three parts separately.
A function of the library called with an argument outside its domain raises
:class:`ArgumentError`. Both descend from
:class:`~cyclecheck.algebra.exceptions.CycleCheckError`, the one root of every error a user can
cause (re-exported here).
"""

from __future__ import annotations

import difflib
import json
import os
from collections.abc import Iterable
from pathlib import Path

from ..algebra.exceptions import CycleCheckError

__all__ = ["ArgumentError", "CycleCheckError", "ModelError", "did_you_mean", "shown"]


class ArgumentError(CycleCheckError, ValueError):
    """A library function was called with an argument outside its domain.

    The message names the argument and the rule, e.g. ``"level must be in (0, 1), got 2"``.
    Also a :class:`ValueError`, as Python callers expect of a bad argument.
    """


class ModelError(CycleCheckError):
    """A model file, table or distribution breaks a rule.

    Parameters
    ----------
    rule : str
        What is broken, in plain words, for example ``"tokens must be an integer >= 0, got -1"``.
    file : str or os.PathLike, optional
        The file at fault, or ``None`` when the input did not come from a file.
    item : str, optional
        The element at fault, for example ``'transition "cap"'``,
        ``'place 3 (fill -> cap, index 2)'`` or ``'line 12'``; ``None`` when the whole file is
        at fault.

    Attributes
    ----------
    file : pathlib.Path or None
    item : str or None
    rule : str

    Examples
    --------
    >>> str(ModelError("tokens must be an integer >= 0, got -1", file="models/x.toml",
    ...                item="place 3 (fill -> cap, index 2)"))
    'models/x.toml: place 3 (fill -> cap, index 2): tokens must be an integer >= 0, got -1'
    """

    def __init__(
        self,
        rule: str,
        *,
        file: str | os.PathLike[str] | None = None,
        item: str | None = None,
    ) -> None:
        super().__init__(rule)
        self.rule = str(rule)
        self.file = Path(file) if file is not None else None
        self.item = item

    def __str__(self) -> str:
        parts = [str(self.file)] if self.file is not None else []
        if self.item:
            parts.append(self.item)
        parts.append(self.rule)
        return ": ".join(parts)

    def __repr__(self) -> str:
        return f"ModelError({self.rule!r}, file={self.file!r}, item={self.item!r})"

    def __reduce__(self) -> tuple[object, ...]:
        # Keyword-only arguments are not in self.args: rebuild explicitly so that the error
        # survives pickling (worker processes, Dask).
        return (_rebuild, (self.rule, self.file, self.item))

    def located(
        self, file: str | os.PathLike[str] | None = None, item: str | None = None
    ) -> ModelError:
        """A copy with ``file`` and ``item`` filled in where this error has none.

        Used by the model-file layer to attach its file name and element to errors raised by
        lower layers (distribution specs) that do not know them.
        """
        err = ModelError(
            self.rule,
            file=self.file if self.file is not None else file,
            item=self.item if self.item is not None else item,
        )
        err.__cause__ = self.__cause__
        return err


def _rebuild(rule: str, file: Path | None, item: str | None) -> ModelError:
    return ModelError(rule, file=file, item=item)


def did_you_mean(word: str, choices: Iterable[str]) -> str:
    """``'; did you mean "x"?'`` for the closest choice, else ``''``.

    A choice that differs from ``word`` only in case wins; otherwise the closest choice by
    difflib's ratio (>= 0.6), with case ignored. ``word`` itself is never suggested.

    >>> did_you_mean("toekns", ["from", "to", "tokens", "hold"])
    '; did you mean "tokens"?'
    >>> did_you_mean("M2", ["m1", "m2", "m3"])
    '; did you mean "m2"?'
    """
    folded: dict[str, str] = {}
    for choice in choices:
        if choice != word:  # the word itself is no suggestion
            folded.setdefault(choice.casefold(), choice)
    key = word.casefold()
    if key in folded:
        return f'; did you mean "{folded[key]}"?'
    match = difflib.get_close_matches(key, list(folded), n=1)
    return f'; did you mean "{folded[match[0]]}"?' if match else ""


def shown(x: object) -> str:
    """A value as a message shows it: strings quoted, booleans as in TOML, floats short."""
    if isinstance(x, bool):
        return "true" if x else "false"
    if isinstance(x, str):
        return json.dumps(x)
    if isinstance(x, float):
        return f"{x:.15g}"
    if isinstance(x, (dict, list, tuple)):
        text = json.dumps(x, default=str)
        return text if len(text) <= 60 else text[:57] + "..."
    return str(x)
