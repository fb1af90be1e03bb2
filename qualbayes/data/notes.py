"""Notes about rows of an export that were left out (shared by the lot and life readers)."""

from __future__ import annotations


def skipped_note(skipped: list[dict], label: str) -> list[str]:
    """The note listing rows left out for want of a result (empty when none were).

    >>> skipped_note([{"row": 5, "lot": "L-7", "reason": "defectives blank"}], "lot")[0][:32]
    '1 row(s) without a result yet we'
    """
    if not skipped:
        return []
    rows = ", ".join(f"row {s['row']} ({label} {s[label]})" for s in skipped[:50])
    more = f" and {len(skipped) - 50} more" if len(skipped) > 50 else ""
    return [f"{len(skipped)} row(s) without a result yet were left out: {rows}{more} "
            "(--strict refuses them instead)"]


def leave_out(skipped: list[dict], *, strict: bool, fail, label: str, ident: str, row: int,
              blank: str, column: str) -> None:
    """A row without a result yet: listed in ``skipped``, or refused (``fail``) if strict."""
    if strict:
        raise fail(f"{label} {ident!r} has no result yet ({blank}); --strict refuses rows "
                   "without a result (without it they are left out and listed)", column)
    skipped.append({"row": row, label: ident, "reason": blank})
