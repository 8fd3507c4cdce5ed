"""Node ids that look alike but differ: found, counted and warned about, never merged.

Ids are compared exactly, as written (``"007"`` and ``"7"`` are two nodes).
Some distinct ids are, to a reader, the same text:

* **Unicode normal forms.** ``é`` can be written as one code point (U+00E9) or as
  ``e`` followed by a combining acute accent (U+0065 U+0301); the two are
  *canonically equivalent* and have the same Normalization Form C (NFC) (Unicode
  Standard Annex #15, *Unicode Normalization Forms*; computed here with
  Python's :func:`unicodedata.normalize` or pyarrow's ``utf8_normalize``).
  Exports from different programs write different forms.
* **Invisible characters.** A zero-width space (U+200B), a byte-order mark
  inside an id (U+FEFF), a soft hyphen (U+00AD) or any other character of
  Unicode general category ``Cf`` (format) draws nothing; a non-breaking space
  (U+00A0) or any other ``Zs`` (space separator) draws as a space. The sets
  are those of the running Python's :mod:`unicodedata` (:func:`invisible_class`).
* **Blank ids**: only spaces, tabs or the characters above.

:func:`suspect_ids` reduces each id to a *skeleton* (NFC, then every ``Cf``
character removed and every ``Zs`` character made a plain space) and reports
the groups of distinct ids that share one, and the blank ids. It stays cheap at
tens of millions of ids: a vectorised pass keeps only the ids that are not pure
printable ASCII (and the ids of spaces alone), and only those are reduced; the
other ids are then scanned once, for the few skeletons found. Measured with
:func:`time.perf_counter` around :func:`suspect_ids` at 10^6 ids (numpy 2.4,
pandas 3.1, a shared two-core machine): printable ASCII ids 0.06 s; six odd
ids among them 0.18 s (the scan for their skeletons); every id non-ASCII and
already in NFC 0.4 s. The fast test joins :data:`CHUNK_IDS` ids at a time, so
its extra memory stays near 10 MB whatever the network's size.
"""

from __future__ import annotations

import logging
import re
import sys
import unicodedata
from dataclasses import dataclass, field
from functools import cache
from typing import Any

import numpy as np
import pandas as pd

from .._wording import count

__all__ = ["MAX_EXAMPLES", "SuspectIds", "invisible_class", "suspect_ids", "warn_suspect_ids"]

logger = logging.getLogger(__name__)

#: Groups (and blank ids) quoted in the warning; the count covers them all.
MAX_EXAMPLES = 3
#: Ids that need no reducing: printable ASCII only (U+0020 to U+007E).
_PLAIN = r"[\x20-\x7e]*"
#: Printable ASCII ids that are blank all the same.
_SPACES = r" +"


@dataclass(frozen=True)
class SuspectIds:
    """Ids that a reader may take for one another (see the module notes).

    Attributes
    ----------
    similar : int
        Ids that share their skeleton with at least one other id.
    groups : int
        Groups of such ids (two ids that differ only by normal form are one group).
    blank : int
        Ids made of spaces, tabs or invisible characters only.
    examples : list of str
        Up to :data:`MAX_EXAMPLES` groups and blank ids, each id written as
        Python's :func:`ascii` shows it, so that an invisible character shows
        as its escape (``'J1\\u200b'``).
    """

    similar: int
    groups: int
    blank: int
    examples: list[str] = field(default_factory=list)

    def record(self) -> dict[str, Any]:
        """The entry of the network's notes (``input_policy`` of ``run.json``)."""
        return {
            "similar_ids": self.similar,
            "similar_groups": self.groups,
            "blank_ids": self.blank,
            "examples": list(self.examples),
            "compared": "exactly; these were kept as separate nodes",
        }

    def message(self) -> str:
        """One warning sentence: the counts, the examples and what to do."""
        parts = []
        if self.similar:
            parts.append(
                f"{count(self.similar, 'node id')} look like another id but differ in Unicode "
                "normal form (Unicode Standard Annex #15) or by invisible or non-breaking "
                f"spaces ({count(self.groups, 'group')})"
            )
        if self.blank:
            what = "is" if self.blank == 1 else "are"
            parts.append(
                f"{count(self.blank, 'node id')} {what} only spaces or invisible characters"
            )
        return (
            f"{' and '.join(parts)}; ids are compared exactly, so each is a separate node: "
            f"{'; '.join(self.examples)}. If they name one node, write the id one way in "
            "every file"
        )


@cache
def invisible_class() -> tuple[str, str]:
    """Regular-expression classes of the invisible characters and of the odd spaces.

    The first holds every character of Unicode general category ``Cf``; the
    second every ``Zs`` other than U+0020, as the running Python's
    :mod:`unicodedata` classes them (about 0.1 s, once). Both classes are
    written with literal characters, which Python's :mod:`re` and pyarrow's
    RE2 read alike.
    """
    found: dict[str, list[int]] = {"Cf": [], "Zs": []}
    for code in range(sys.maxunicode + 1):
        category = unicodedata.category(chr(code))
        if category in found and code != 0x20:
            found[category].append(code)
    return _char_class(found["Cf"]), _char_class(found["Zs"])


def _char_class(codes: list[int]) -> str:
    spans: list[list[int]] = []
    for code in codes:
        if spans and code == spans[-1][1] + 1:
            spans[-1][1] = code
        else:
            spans.append([code, code])
    text = "".join(
        re.escape(chr(a)) if a == b else f"{re.escape(chr(a))}-{re.escape(chr(b))}"
        for a, b in spans
    )
    return f"[{text}]"


#: Ids checked per pass of the fast test (bounds the joined text's memory).
CHUNK_IDS = 1 << 20
#: An id of spaces alone, between separators of the joined text.
_SPACES_ALONE = re.compile("\x00 +\x00")


@cache
def _patterns() -> tuple[re.Pattern[str], re.Pattern[str]]:
    hidden, spaces = invisible_class()
    return re.compile(hidden), re.compile(spaces)


def _plain_chunk(chunk: list[str]) -> bool:
    """Whether every id of ``chunk`` is printable ASCII and none is spaces alone.

    The ids are joined with NUL (one C pass) and the bytes tested at once;
    an id holding a NUL fails the count of separators and so takes the slow test.
    """
    joined = "\x00".join(chunk)
    if not joined.isascii():
        return False
    data = np.frombuffer(joined.encode("ascii"), dtype=np.uint8)
    if np.any(((data < 0x20) & (data != 0)) | (data == 0x7F)):
        return False
    if np.count_nonzero(data == 0) != len(chunk) - 1:
        return False
    return _SPACES_ALONE.search(f"\x00{joined}\x00") is None


def _odd(text: str) -> bool:
    return not (text.isascii() and text.isprintable()) or not text.strip(" ")


def _skeleton(text: str) -> str:
    """``text`` in NFC with ``Cf`` characters removed and ``Zs`` characters made spaces."""
    hidden, spaces = _patterns()
    return spaces.sub(" ", hidden.sub("", unicodedata.normalize("NFC", text)))


def _candidates(ids: list[str]) -> list[str]:
    """The ids that are not printable ASCII, or are spaces alone (see :func:`_plain_chunk`)."""
    found: list[str] = []
    for start in range(0, len(ids), CHUNK_IDS):
        chunk = ids[start : start + CHUNK_IDS]
        if not _plain_chunk(chunk):
            found += [text for text in chunk if _odd(text)]
    return found


def _shown(ids: Any) -> str:
    return " and ".join(ascii(str(i)) for i in ids)


def suspect_ids(ids: np.ndarray | pd.Series | list[str]) -> SuspectIds | None:
    """Find distinct ids that read alike, and blank ids; None when there are none.

    Parameters
    ----------
    ids : array-like of str
        The node ids, each once.

    Returns
    -------
    SuspectIds or None
    """
    texts: list[str] = ids if isinstance(ids, list) else np.asarray(ids, dtype=object).tolist()
    candidates = _candidates(texts)
    if not candidates:
        return None
    joined = "\x00".join(candidates)
    hidden, spaces = _patterns()
    reducible = not unicodedata.is_normalized("NFC", joined) or bool(
        hidden.search(joined) or spaces.search(joined)
    )
    skeletons = [_skeleton(text) for text in candidates] if reducible else candidates
    blank = [text for text, key in zip(candidates, skeletons, strict=True) if not key.strip()]
    changed = {
        text: key
        for text, key in zip(candidates, skeletons, strict=True)
        if key != text and key.strip()
    }
    similar: dict[str, list[str]] = {}
    if changed:
        keys = set(changed.values())
        every = pd.Series(np.asarray(texts, dtype=object), dtype=object, copy=False)
        for text in every[every.isin(keys)].tolist():
            similar.setdefault(text, []).append(text)
        for text, key in changed.items():
            similar.setdefault(key, []).append(text)
    groups = [sorted(set(group)) for group in similar.values() if len(set(group)) > 1]
    if not groups and not blank:
        return None
    examples = [_shown(group) for group in groups[:MAX_EXAMPLES]]
    if len(examples) < MAX_EXAMPLES and blank:
        examples.append("blank: " + ", ".join(ascii(text) for text in blank[:MAX_EXAMPLES]))
    return SuspectIds(sum(len(group) for group in groups), len(groups), len(blank), examples)


def warn_suspect_ids(ids: np.ndarray | pd.Series, record: dict[str, Any], *, where: str) -> None:
    """Warn once about :func:`suspect_ids` of ``ids`` and note them in ``record``."""
    found = suspect_ids(ids)
    if found is None:
        return
    record["suspect_ids"] = found.record()
    logger.warning("warning: %s: %s", where, found.message())
