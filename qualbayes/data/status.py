"""The plant's own status words for life data: ``--status "Removed (NFF)=suspended"``.

Field-return and rig-test exports use words of their own ("Removed (NFF)", "Scrapped",
"In service"). Each mapping names one status text and what it means, failed or suspended; the
text is compared without regard to case or surrounding spaces, and a mapping is tried before
the built-in words (so it is also the way to read a word the tool does not know). Every use
is echoed in the notes with its rows, and a mapping that matched no unit is noted too.

>>> m = StatusMap.parse(["Removed (NFF)=suspended", "Scrapped = failed"])
>>> m.read("removed (nff) ", 7), m.read("F", 8)
('suspension', None)
>>> m.notes()[0]
"status 'Removed (NFF)' read as suspended: 1 unit (row 7)"
"""

from __future__ import annotations

from qualbayes.errors import OptionError

#: what a mapping may say, and the observation kind it gives (the values of data/life.py)
KINDS = {"failed": "failure", "failure": "failure", "f": "failure",
         "suspended": "suspension", "suspension": "suspension", "s": "suspension",
         "censored": "suspension", "running": "suspension"}
WORDS = {"failure": "failed", "suspension": "suspended"}


def _key(value: object) -> str:
    if isinstance(value, float) and value.is_integer():
        value = int(value)
    return " ".join(str(value).split()).casefold()


class StatusMap:
    """Status text -> ``failure`` or ``suspension``, with the rows each text was read on."""

    def __init__(self, mapping: dict[str, str]):
        self.texts: dict[str, str] = {}  # key -> text as the engineer wrote it
        self.kinds: dict[str, str] = {}
        for text, kind in mapping.items():
            key = _key(text)
            if not key:
                raise OptionError("--status: the status text before '=' is empty")
            meaning = KINDS.get(kind.strip().casefold())
            if meaning is None:
                raise OptionError(f"--status {text}={kind}: say 'failed' or 'suspended' "
                                  "after '='")
            if key in self.kinds and self.kinds[key] != meaning:
                raise OptionError(f"--status: {text!r} is mapped twice, to different kinds")
            self.texts[key], self.kinds[key] = text.strip(), meaning
        self.rows: dict[str, list[int]] = {k: [] for k in self.kinds}

    @classmethod
    def parse(cls, items: list[str] | None) -> StatusMap:
        """From ``["TEXT=failed", "TEXT=suspended", ...]`` (the repeated option)."""
        mapping: dict[str, str] = {}
        for item in items or []:
            if "=" not in item:
                raise OptionError(f"--status {item!r}: write TEXT=failed or TEXT=suspended, "
                                  "e.g. --status \"Removed (NFF)=suspended\"")
            text, kind = item.rsplit("=", 1)
            mapping[text] = kind
        return cls(mapping)

    def read(self, value: object, row: int) -> str | None:
        """The kind a mapped status means (recording the row), or None if not mapped."""
        if not self.kinds or value is None or isinstance(value, bool):
            return None
        key = _key(value)
        if key not in self.kinds:
            return None
        self.rows[key].append(row)
        return self.kinds[key]

    def notes(self) -> list[str]:
        """One line per mapping: what it was read as and on which rows."""
        out = []
        for key, rows in self.rows.items():
            text, word = self.texts[key], WORDS[self.kinds[key]]
            if not rows:
                out.append(f"status mapping {text!r}={word} matched no unit")
                continue
            shown = ", ".join(str(r) for r in rows[:30]) + (" ..." if len(rows) > 30 else "")
            units = "unit" if len(rows) == 1 else "units"
            label = "row" if len(rows) == 1 else "rows"
            out.append(f"status {text!r} read as {word}: {len(rows)} {units} ({label} {shown})")
        return out
