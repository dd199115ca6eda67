"""Prompt backends: who answers the procedure's prompts.

- ``TerminalBackend``: a person at plain stdin/stdout line prompts (works over ssh and
  through a pipe); Enter measures, single letters go back, redo, abort, ask for help.
- ``AutoBackend``: nobody; every prompt is answered with Enter (relay-switched fixtures,
  the analyzer's own switch). A step that keeps failing its checks aborts the procedure
  after ``retries`` repeats, with the last reason.
- ``ScriptedBackend``: a list of answers standing in for a technician (tests, the demo):
  what is connected at each step and which keys are pressed; then as ``AutoBackend``.
"""

from __future__ import annotations

from collections.abc import Iterable
from dataclasses import dataclass
from typing import Protocol, TextIO

from acquire.guided.console import Console
from acquire.guided.keys import ABORT, HELP, HELP_TEXT, KEEP, PROCEED, Action, parse_key

STEP, VERIFY, SAVE = "step", "verify", "save"


@dataclass(frozen=True)
class Prompt:
    """One question to the technician."""

    stage: str  # STEP | VERIFY | SAVE
    title: str  # the progress line
    lines: tuple[str, ...]  # what to do now
    keys: str  # the short key hint shown under it
    attempt: int = 1  # 2 and up: this stage failed before
    problem: str = ""  # the last failure, for an unattended abort


class Backend(Protocol):
    name: str
    description: str

    def ask(self, prompt: Prompt) -> Action: ...


class TerminalBackend:
    """Line prompts on a text stream; an empty line is Enter, end of input aborts."""

    name = "terminal"
    description = "you answer the prompts (Enter measures; ? lists the keys)"

    def __init__(self, console: Console, stdin: TextIO) -> None:
        self.console = console
        self.stdin = stdin

    def ask(self, prompt: Prompt) -> Action:
        self.console.say(prompt.title, *prompt.lines, prompt.keys)
        while True:
            self.console.prompt("> ")
            line = self.stdin.readline()
            if not line:
                self.console.say("")
                return Action(ABORT, reason="input ended")
            action = parse_key(line)
            if action is None:
                self.console.say(f"unknown answer {line.strip()!r}: type ? and Enter for help")
            elif action.kind == HELP:
                self.console.say(*HELP_TEXT)
            else:
                return action


class AutoBackend:
    """Answers Enter to everything; gives up on a step after ``retries`` repeats."""

    name = "auto"
    description = "unattended: each step runs as soon as it is reached"

    def __init__(self, console: Console, retries: int = 2) -> None:
        self.console = console
        self.retries = retries

    def ask(self, prompt: Prompt) -> Action:
        self.console.say(prompt.title)
        if prompt.attempt > self.retries + 1:
            return Action(ABORT, reason=f"gave up after {prompt.attempt - 1} failed attempts: "
                                        f"{prompt.problem}")
        return Action(PROCEED)


class ScriptedBackend:
    """Plays ``actions`` in order (echoed, so a log reads like a session), then auto."""

    name = "scripted"
    description = "a script answers the prompts, then each step runs unattended"

    def __init__(self, console: Console, actions: Iterable[Action], retries: int = 2) -> None:
        self.console = console
        self.pending = list(actions)
        self.auto = AutoBackend(console, retries)

    def ask(self, prompt: Prompt) -> Action:
        if not self.pending:
            return self.auto.ask(prompt)
        self.console.say(prompt.title)
        action = self.pending.pop(0)
        if action.kind == HELP:
            self.console.say(*HELP_TEXT)
            return self.ask(prompt)
        self.console.say(f"> {_describe(action)} (scripted)")
        return action


def _describe(action: Action) -> str:
    if action.kind == PROCEED and action.connect == KEEP:
        return "keep what is connected, Enter"
    if action.kind == PROCEED and action.connect:
        return f"connect {action.connect}, Enter"
    if action.kind == PROCEED:
        return "Enter"
    if action.step:
        return f"go to step {action.step}"
    return action.kind
