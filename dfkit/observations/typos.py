"""The typing mistakes that turn one number into another: what a mistyped coordinate may have been meant to be.

:func:`variants` lists, for a number as written, every number one common slip away: the sign lost or added,
two neighbouring digits swapped, one digit changed, the decimal point in another place, a digit missing, a
digit too many. Which of them is *likely* is decided elsewhere, by evidence (a station far from the other
stations of its fix that one variant brings back among them: :mod:`dfkit.observations.positions`).
These are the common slips of typing (single substitution, transposition of neighbours, omission and
insertion: F. J. Damerau, "A technique for computer detection and correction of spelling errors",
Comm. ACM 7(3), 171-176, 1964 [from memory]); the sign and the decimal point are added for numbers.
"""

from __future__ import annotations

import re

#: The kinds of slip, in the order they are reported (the simplest first).
KINDS = ("sign", "digits swapped", "one digit changed", "decimal point moved", "a digit missing",
         "a digit too many")

_PLAIN = re.compile(r"^[+-]?(\d+(\.\d*)?|\.\d+)$")


def variants(text: str, *, point: bool = True) -> list[tuple[str, str]]:
    """Numbers one slip away from ``text`` as ``(text, kind)`` pairs, without repeats and without ``text``.

    Only plain numbers (``47.874``, ``-15.148``, ``530212``) are varied; any other text gives no variants.
    ``point=False`` leaves the decimal point where it is (grid metres are written without one).

    >>> ("47.874", "one digit changed") in variants("48.874")
    True
    >>> ("15.148", "sign") in variants("-15.148")
    True
    >>> ("5302128", "a digit missing") in variants("530212", point=False)
    True
    """
    s = str(text).strip()
    if not _PLAIN.match(s):
        return []
    sign, body = (s[0], s[1:]) if s[0] in "+-" else ("", s)
    out: dict[str, str] = {}

    def add(candidate_body, kind, candidate_sign=sign):
        c = candidate_sign + candidate_body
        if candidate_body and candidate_body != "." and c != s and c not in out and _PLAIN.match(c):
            out[c] = kind

    add(body, "sign", "" if sign == "-" else "-")
    digits = [i for i, ch in enumerate(body) if ch.isdigit()]
    for a, b in zip(digits, digits[1:]):
        if b == a + 1 and body[a] != body[b]:
            add(body[:a] + body[b] + body[a] + body[b + 1:], "digits swapped")
    for i in digits:
        for d in "0123456789":
            if d != body[i]:
                add(body[:i] + d + body[i + 1:], "one digit changed")
    if point:
        bare = body.replace(".", "")
        for k in range(1, len(bare)):
            add(bare[:k] + "." + bare[k:], "decimal point moved")
        if "." in body:
            add(bare, "decimal point moved")
    for i in range(len(body) + 1):
        for d in "0123456789":
            add(body[:i] + d + body[i:], "a digit missing")
    for i in digits:
        add(body[:i] + body[i + 1:], "a digit too many")
    return list(out.items())


def describe(fits: list[tuple[str, str, str]], limit: int = 3) -> str:
    """Words for the variants that fit: ``fits`` holds ``(column, text, kind)``, the best first.

    >>> describe([("lat", "47.874", "one digit changed"), ("lon", "15.148", "sign")])
    'lon 15.148 (sign); lat 47.874 (one digit changed)'
    """
    by_kind: dict[tuple[str, str], list[str]] = {}
    for col, text, kind in fits:
        by_kind.setdefault((col, kind), []).append(text)
    parts = []
    for (col, kind), texts in sorted(by_kind.items(), key=lambda kv: KINDS.index(kv[0][1])):
        if len(texts) <= 2:
            parts.append(f"{col} {' or '.join(texts)} ({kind})")
        else:
            parts.append(f"{kind} in the {col} ({len(texts)} ways fit, such as {texts[0]})")
    more = f", and {len(parts) - limit} more" if len(parts) > limit else ""
    return "; ".join(parts[:limit]) + more
