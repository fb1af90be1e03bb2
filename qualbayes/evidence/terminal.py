"""Plain-text tables for the terminal, and printing with control characters escaped.

File names, lot ids and sheet names come from untrusted files: an escape sequence printed raw
can clear the screen or colour a forged line. :func:`escape_controls` shows every control
character (C0, DEL, C1), bidirectional control and other invisible format character
(Unicode category Cf) as a visible ``\\xNN`` / ``\\uNNNN`` escape; only newline (and tab
when asked) pass.
"""

from __future__ import annotations

import re
import sys
import unicodedata
from collections.abc import Sequence

from qualbayes.evidence.numbers import cell

_CONTROLS = re.compile(r"[\x00-\x08\x0b-\x1f\x7f-\x9f\u061c\u200b-\u200f\u202a-\u202e"
                       r"\u2060-\u206f\ufeff\ufff9-\ufffb\U000e0000-\U000e007f]")


def _visible(m: re.Match | str) -> str:
    ch = m if isinstance(m, str) else m.group()
    return f"\\x{ord(ch):02x}" if ord(ch) < 0x100 else (
        f"\\u{ord(ch):04x}" if ord(ch) < 0x10000 else f"\\U{ord(ch):08x}")


def escape_controls(text: str, keep_tab: bool = True) -> str:
    """``text`` with control and invisible format characters shown as escapes."""
    text = _CONTROLS.sub(_visible, str(text))
    if any(unicodedata.category(ch) == "Cf" for ch in text if ord(ch) > 0x7f):
        text = "".join(_visible(ch) if unicodedata.category(ch) == "Cf" else ch
                       for ch in text)
    return text if keep_tab else text.replace("\t", "\\t")


def print_text(text: str, raw: bool = False, file=None) -> None:
    """Print ``text`` (escaped unless ``raw``: a JSON document escapes its own)."""
    out = text.rstrip("\n")
    (file or sys.stdout).write((out if raw else escape_controls(out)) + "\n")


def table(headers: Sequence[str], rows: Sequence[Sequence[object]],
          align: str | None = None) -> str:
    """Columns padded to width; ``align`` holds 'l' or 'r' per column (default: text left,
    numbers right)."""
    text = [[_fmt(v) for v in row] for row in rows]
    widths = [max([len(h)] + [len(r[j]) for r in text]) for j, h in enumerate(headers)]
    if align is None:
        align = "".join(
            "r" if rows and all(isinstance(r[j], int | float) or r[j] is None for r in rows)
            else "l" for j in range(len(headers)))

    def line(cells):
        return "  ".join(c.rjust(w) if a == "r" else c.ljust(w)
                         for c, w, a in zip(cells, widths, align, strict=True)).rstrip()

    out = [line(headers), line(["-" * w for w in widths])]
    out += [line(r) for r in text]
    return "\n".join(out)


def _fmt(v: object) -> str:
    return cell(v)
