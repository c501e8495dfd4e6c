"""Help for regression notebooks: the nbval sanitize file shipped with the package.

nbval compares a notebook's stored outputs with a fresh run; the sanitize file
replaces what changes from run to run (memory addresses, temporary paths,
widget model ids) before the comparison. Print its path with::

    python -m fxnet_widgets.testing

and use it as::

    pytest --nbval --nbval-current-env --nbval-sanitize-with "$(python -m fxnet_widgets.testing)" my.ipynb

Mark every cell that displays a widget with a first line ``# NBVAL_IGNORE_OUTPUT``
and print the values that matter (``explorer.summary()``, ``result.summary()``)
in separate cells: those texts are deterministic.
"""

from __future__ import annotations

import re
import sys
from pathlib import Path

__all__ = ["SANITIZE_FILE", "sanitize_file", "sanitize_rules", "sanitize"]

#: the nbval sanitize file of the package
SANITIZE_FILE = Path(__file__).resolve().with_name("nbval_sanitize.cfg")


def sanitize_file() -> Path:
    """Path of the nbval sanitize file (``--nbval-sanitize-with``)."""
    return SANITIZE_FILE


def sanitize_rules(path: str | Path | None = None) -> list[tuple[str, str]]:
    """The ``(regex, replace)`` pairs of a sanitize file, in file order (as nbval reads them)."""
    p = SANITIZE_FILE if path is None else Path(path)
    text = p.read_text(encoding="utf-8")
    # the same reading as nbval's (a "regex:" line directly followed by a "replace:" line)
    rules = re.findall(r"^regex: (.*)$\n^replace: (.*)$", text, flags=re.MULTILINE)
    if not rules:
        raise ValueError(f"{p}: a sanitize file must hold regex:/replace: line pairs, not none")
    return [(a, b) for a, b in rules]


def sanitize(text: str, path: str | Path | None = None) -> str:
    """``text`` with every rule of the sanitize file applied (what nbval compares)."""
    for regex, replace in sanitize_rules(path):
        text = re.sub(regex, replace, text)
    return text


def main() -> int:
    print(SANITIZE_FILE)
    return 0


if __name__ == "__main__":  # pragma: no cover
    sys.exit(main())
