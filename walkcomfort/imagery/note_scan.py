"""Personal data in free-text notes: find e-mail addresses, phone numbers and personal names.

Used by :mod:`walkcomfort.imagery.share` when notes are kept (``--keep-notes``): a
note that matches is either refused (the default: one line naming the file, the row
and the kind of finding — never the finding itself), masked (``--mask-notes``:
each match replaced by ``[e-mail]``, ``[phone]`` or ``[name]``), or kept as written
when the user states the notes were reviewed by hand.

The patterns (documented so a reviewer knows what is *not* caught)
------------------------------------------------------------------
e-mail address
    ``local@domain.tld``: letters, digits and ``._%+-`` before the ``@``, a dotted
    domain with a final part of two or more letters (the usual shape of an address,
    common practice; quoted or internationalised local parts are not covered).
phone number
    A run of digits that may contain spaces, dots, dashes and parentheses and may start
    with ``+``, holding 7 to 15 digits (15 is the longest international number in ITU-T
    E.164, from memory; 7 is the shortest local subscriber number in common use, common
    practice). ISO dates (``2026-07-14``) and clock times are not phone numbers.
personal name
    A capitalised word (an upper-case letter, then lower-case letters; a hyphen or
    apostrophe may join parts, as in ``Ana-Maria`` or ``O'Neill``) that either follows a
    cue word (``with, met, called, named, told, asked, friend, neighbour, colleague,
    Mr, Mrs, Ms, Dr, ...``) or does not start a sentence (a proper noun in running
    text: people, but also places — places are flagged too, which errs on the safe side).
    Names written in lower case, or a lone name at the start of a note, are not caught:
    read the notes before sharing them.
"""

from __future__ import annotations

import re
from dataclasses import dataclass, field

from walkcomfort.errors import InputError

EMAIL = re.compile(r"(?<![\w.%+-])[A-Za-z0-9._%+-]+@[A-Za-z0-9-]+(?:\.[A-Za-z0-9-]+)*\.[A-Za-z]{2,}")
PHONE = re.compile(r"(?<![\w+])\+?\(?\d[\d\s().-]{5,}\d(?![\w])")
_DATE_OR_TIME = re.compile(r"\d{4}-\d{2}-\d{2}(?:[ T]\d{2}:\d{2}(?::\d{2})?)?|\d{1,2}:\d{2}(?::\d{2})?")
_WORD = re.compile(r"[^\W\d_]+(?:['’-][^\W\d_]+)*")
_SENTENCE_END = re.compile(r"[.!?:;]\s*$")
#: Words after which a capitalised word is taken for a person's name.
CUES = frozenset(["with", "met", "meet", "meeting", "called", "named", "name", "told", "asked", "ask", "and", "friend", "friends", "neighbour", "neighbor", "colleague", "partner", "wife", "husband", "son", "daughter", "mother", "father", "sister", "brother", "mum", "mom", "dad", "aunt", "uncle", "cousin", "mr", "mrs", "ms", "miss", "dr", "prof", "sr", "sra", "don", "doña"])
#: Capitalised words that are not names wherever they stand.
NOT_NAMES = frozenset({"I", "I'm", "I've", "I'd", "I'll", "OK", "Ok"})

MASKS = {"e-mail address": "[e-mail]", "phone number": "[phone]", "personal name": "[name]"}
POLICIES = ("refuse", "mask", "reviewed")


def _phones(text: str) -> list[tuple[int, int]]:
    out = []
    for m in PHONE.finditer(text):
        s = m.group(0).rstrip(" .-(")
        digits = sum(ch.isdigit() for ch in s)
        if 7 <= digits <= 15 and not _DATE_OR_TIME.fullmatch(s.strip()):
            out.append((m.start(), m.start() + len(s)))
    return out


def _capitalised(word: str) -> bool:
    if word in NOT_NAMES or len(word) < 2 or not word[0].isupper():
        return False
    parts = [p for p in re.split(r"['’-]", word) if p]
    # an upper-case letter then lower case, in every part; acronyms (UTCI) have no lower case
    return all(p[1:] == "" or p[1:].islower() for p in parts) and any(ch.islower() for ch in word)


def _names(text: str, skip: list[tuple[int, int]]) -> list[tuple[int, int]]:
    out = []
    prev_word = None
    for m in _WORD.finditer(text):
        if any(a <= m.start() < b for a, b in skip):
            prev_word = None
            continue
        w = m.group(0)
        starts_sentence = prev_word is None or bool(_SENTENCE_END.search(text[:m.start()]))
        after_cue = prev_word is not None and prev_word.lower().rstrip(".") in CUES
        title = w.lower().rstrip(".") in CUES  # 'Dr', 'Mrs': the name follows
        if _capitalised(w) and not title and (after_cue or not starts_sentence):
            out.append((m.start(), m.end()))
        prev_word = w
    return out


def find_personal_data(text: str) -> list[tuple[str, int, int]]:
    """``(kind, start, end)`` of every e-mail address, phone number and personal name in ``text``.

    ``kind`` is one of ``"e-mail address"``, ``"phone number"``, ``"personal name"``; spans
    do not overlap and come in text order.
    """
    if not text:
        return []
    found = [("e-mail address", m.start(), m.end()) for m in EMAIL.finditer(text)]
    taken = [(a, b) for _, a, b in found]
    found += [("phone number", a, b) for a, b in _phones(text) if not any(x < b and a < y for x, y in taken)]
    taken = [(a, b) for _, a, b in found]
    found += [("personal name", a, b) for a, b in _names(text, taken)]
    return sorted(found, key=lambda f: f[1])


def mask_personal_data(text: str) -> tuple[str, list[str]]:
    """``text`` with every finding replaced by its mask, and the kinds replaced."""
    found = find_personal_data(text)
    for kind, a, b in reversed(found):
        text = text[:a] + MASKS[kind] + text[b:]
    return text, [k for k, _, _ in found]


@dataclass
class NoteGuard:
    """Applies one policy to every kept note and counts what it found (kinds only, never the text).

    Parameters
    ----------
    policy : {"refuse", "mask", "reviewed"}
        ``refuse``: the first note with a finding raises :class:`InputError`;
        ``mask``: findings are replaced; ``reviewed``: notes are kept as written (the
        user checked them by hand), findings are still counted for the record.
    """

    policy: str = "refuse"
    counts: dict = field(default_factory=dict)
    notes_changed: int = 0

    def __post_init__(self):
        if self.policy not in POLICIES:
            raise InputError(f"note policy {self.policy!r} is not known; allowed: {', '.join(POLICIES)}",
                             fix="use --mask-notes or --notes-reviewed with --keep-notes")

    def __call__(self, text, where: str) -> str:
        """The note to write for ``text`` found at ``where`` (a file and row, for the error line)."""
        if text is None or not str(text).strip():
            return text
        text = str(text)
        found = find_personal_data(text)
        for kind, _, _ in found:
            self.counts[kind] = self.counts.get(kind, 0) + 1
        if not found or self.policy == "reviewed":
            return text
        if self.policy == "refuse":
            kinds = ", ".join(sorted({k for k, _, _ in found}))
            raise InputError(f"a kept note looks like it holds personal data ({kinds})", where=where,
                             fix="add --mask-notes to replace such text with [e-mail]/[phone]/[name], or "
                                 "--notes-reviewed once the notes were checked by hand, or leave out --keep-notes")
        self.notes_changed += 1
        return mask_personal_data(text)[0]

    def record(self) -> dict:
        return {"policy": self.policy, "found": dict(sorted(self.counts.items())), "notes_masked": self.notes_changed,
                "patterns": "walkcomfort.imagery.note_scan (e-mail, phone 7-15 digits, capitalised names)"}
