"""Command-line argument checking shared by every cationcalc command.

:class:`Parser` is an ``argparse.ArgumentParser`` whose errors are one line
(no usage block), exit with status 2 and suggest the closest command or option
for a misspelling.  The ``*_arg`` functions are argparse ``type=`` checks that
refuse values outside the range a quantity can take, with the fix.

Example
-------
>>> from cationcalc.cli.arguments import Parser, positive_int_arg, temperature_arg
>>> p = Parser(prog="demo")
>>> _ = p.add_argument("--workers", type=positive_int_arg)
>>> _ = p.add_argument("--temperature", type=temperature_arg)
>>> p.parse_args(["--workers", "2", "--temperature", "300"]).workers
2
>>> p.suggestion("--temprature")
'--temperature'
"""

from __future__ import annotations

import argparse
import difflib
import re
import sys
from typing import NoReturn

from cationcalc.compute.models import check_pressure_pa, check_temperature_k


class Parser(argparse.ArgumentParser):
    """ArgumentParser with one-line errors and "did you mean" for misspelt commands and options."""

    def _known_words(self) -> list[str]:
        words: list[str] = []
        for action in self._actions:
            words.extend(s for s in action.option_strings if s.startswith("--"))
            if isinstance(action, argparse._SubParsersAction):
                words.extend(action.choices)
                for sub in action.choices.values():
                    words.extend(s for a in sub._actions for s in a.option_strings if s.startswith("--"))
        return list(dict.fromkeys(words))

    def _commands_with(self, option: str) -> list[str]:
        """Sub-commands that have ``option`` (for an option given to the wrong command)."""
        out: list[str] = []
        for action in self._actions:
            if isinstance(action, argparse._SubParsersAction):
                out += [name for name, sub in action.choices.items()
                        if any(option in a.option_strings for a in sub._actions)]
        return out

    def suggestion(self, word: str) -> str | None:
        """The closest command or option to ``word``, or None."""
        word = word.split("=", 1)[0]
        close = difflib.get_close_matches(word, self._known_words(), n=1, cutoff=0.6)
        return close[0] if close else None

    def error(self, message: str) -> NoReturn:  # noqa: D401 - argparse's hook
        wrong = None
        match = re.search(r"invalid choice: '([^']*)'", message)
        if match:
            wrong = match.group(1)
        else:
            match = re.search(r"unrecognized arguments: (\S+)", message)
            if match:
                wrong = match.group(1)
        hint = ""
        if wrong is not None:
            owners = self._commands_with(wrong.split("=", 1)[0])
            close = self.suggestion(wrong)
            if owners:
                hint = f"; {wrong.split('=', 1)[0]} applies only to: {', '.join(owners)}"
            elif close is not None:
                hint = f"; did you mean {close!r}?"
        message = message.splitlines()[0]
        print(f"{self.prog}: error: {message}{hint} (see {self.prog.split()[0]} "
              f"{'' if ' ' not in self.prog else self.prog.split(' ', 1)[1] + ' '}--help)", file=sys.stderr)
        raise SystemExit(2)


def _number(text: str, kind, what: str):
    try:
        return kind(text)
    except ValueError:
        raise argparse.ArgumentTypeError(f"{text!r} is not {what}") from None


def positive_int_arg(text: str) -> int:
    """An integer of at least 1 (workers, conformers)."""
    value = _number(text, int, "a whole number")
    if value < 1:
        raise argparse.ArgumentTypeError(f"{value} is below 1; give 1 or more")
    return value


def window_arg(text: str) -> float | None:
    """A window in kcal/mol (0 or more), or none/all for no window."""
    if text.strip().lower() in ("none", "all", "off"):
        return None
    value = _number(text, float, "a number of kcal/mol (or none)")
    if not value >= 0:
        raise argparse.ArgumentTypeError(f"{text!r}: give 0 or more kcal/mol, or none for every one")
    return value


def temperature_arg(text: str) -> float:
    """A temperature in K inside :data:`cationcalc.compute.models.TEMPERATURE_RANGE_K`."""
    try:
        return check_temperature_k(_number(text, float, "a number of kelvin"))
    except ValueError as exc:
        raise argparse.ArgumentTypeError(str(exc)) from None


def pressure_arg(text: str) -> float:
    """A pressure in Pa inside :data:`cationcalc.compute.models.PRESSURE_RANGE_PA`."""
    try:
        return check_pressure_pa(_number(text, float, "a number of pascal"))
    except ValueError as exc:
        raise argparse.ArgumentTypeError(str(exc)) from None


def split_refine(argv: list[str]) -> list[str]:
    """``--refine=LEVEL`` → ``--refine-level LEVEL`` (``--refine`` alone takes no value, so it never
    swallows the SMILES after it)."""
    out: list[str] = []
    for token in argv:
        if token.startswith("--refine="):
            out += ["--refine-level", token.split("=", 1)[1]]
        elif token.startswith("--refine-geometry="):
            out += ["--refine-geometry-level", token.split("=", 1)[1]]
        else:
            out.append(token)
    return out


__all__ = ["Parser", "positive_int_arg", "temperature_arg", "pressure_arg", "split_refine"]
