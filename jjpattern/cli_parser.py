"""The argument parser of every command: a usage mistake is one sentence, exit status 2.

argparse's own ending (the whole usage block, then ``error: argument --model/--geometry:
invalid choice ...``) buries the one line that matters; here it is that line, naming the
option and the fix.
"""

from __future__ import annotations

import argparse
import difflib
import re
import sys

#: What a value of an option with choices is, in words ('fraunhofer' is not a model).
_NOUNS = {"model": "a model", "loss": "a loss", "criterion": "a criterion",
          "node_floor": "a node-floor setting", "decimal": "a decimal mark",
          "command": "a command", "catalog_command": "a catalog action",
          "what": "a kind of entry"}


def choice_sentence(option: str, value, choices, noun: str = "a choice") -> str:
    """``"--loss: 'cauchi' is not a loss; use one of linear, ..., cauchy (did you mean
    cauchy?)"``: a value outside an option's choices, with the nearest choice."""
    choices = [str(c) for c in choices]
    close = difflib.get_close_matches(str(value), choices, n=1, cutoff=0.7)
    hint = f" (did you mean {close[0]}?)" if close else ""
    head = f"{option}: " if option else ""
    return f"{head}{value!r} is not {noun}; use one of {', '.join(choices)}{hint}"


class Parser(argparse.ArgumentParser):
    """An :class:`argparse.ArgumentParser` whose errors are one sentence on stderr."""

    def _check_value(self, action, value):
        if action.choices is not None and value not in action.choices:
            # A positional (the command, a catalog action) is named by the sentence itself.
            option = action.option_strings[0] if action.option_strings else ""
            if action.dest == "model":
                from .settings import unknown_model_message

                self.error(f"{option}: {unknown_model_message(value)}")
            self.error(choice_sentence(option, value, action.choices,
                                       _NOUNS.get(action.dest, "a choice")))
        super()._check_value(action, value)

    def error(self, message):
        message = _plain(message).rstrip(".")
        if "; use " not in message:  # argparse's own words name no fix
            message += f"; see {self.prog} --help"
        self.exit(2, f"{self.prog}: {message}.\n")

    def exit(self, status=0, message=None):
        if message:
            sys.stderr.write(message)
        sys.exit(status)


def _plain(message: str) -> str:
    """argparse's wording made plain: ``argument --model/--geometry: ...`` names the
    option as typed on the command line."""
    if message.startswith("argument "):
        names, sep, rest = message[len("argument "):].partition(": ")
        if sep:
            message = f"{names.split('/')[0]}: {rest}"
    message = re.sub(r"invalid (int|float) value: ('.*')",
                     lambda m: f"{m.group(2)} is not a "
                               + ("whole number" if m.group(1) == "int" else "number"),
                     message)
    if message.startswith("the following arguments are required: "):
        return f"{message.split(': ', 1)[1]} missing"
    return message
