"""People's names in the roster: which are allowed, and when two count as the same.

A name is shown on every sheet as who prepared or checked a calc, so one that looks like
another listed name is refused: invisible and control characters (Unicode categories Cc,
Cf, Zl, Zp and every separator other than the plain space U+0020), letters of Latin mixed
with Cyrillic or Greek in one name, and a name whose look-alike skeleton (NFKC, case
folded, single spaces, Cyrillic and Greek letters that look like Latin ones mapped to them;
after UTS #39, with a small table) equals another listed name's.  Standard library only.
"""

from __future__ import annotations

import unicodedata

MAX_LENGTH = 64      # the X.509 common name of the person's certificate holds at most 64
FIX = ("type the name with ordinary letters of one script and plain spaces only (retype it "
       "rather than pasting it)")
_MIXED = frozenset({"LATIN", "CYRILLIC", "GREEK"})
# Cyrillic and Greek lower-case letters (after case folding) that look like Latin ones.
_LOOK_ALIKES = str.maketrans({
    "а": "a", "в": "b", "е": "e", "ё": "e", "һ": "h", "н": "h", "і": "i", "ї": "i",
    "ј": "j", "к": "k", "ӏ": "l", "м": "m", "о": "o", "р": "p", "ԛ": "q", "с": "c",
    "ѕ": "s", "т": "t", "у": "y", "х": "x", "ԁ": "d", "ԝ": "w", "ь": "b", "п": "n",
    "α": "a", "β": "b", "ε": "e", "ζ": "z", "η": "h", "ι": "i", "κ": "k", "μ": "m",
    "ν": "v", "ο": "o", "ρ": "p", "τ": "t", "υ": "u", "χ": "x", "ω": "w", "γ": "y"})


def char_label(char: str) -> str:
    """U+XXXX NAME of one character, for messages."""
    fallback = "CONTROL CHARACTER" if unicodedata.category(char) == "Cc" else "UNNAMED CHARACTER"
    return f"U+{ord(char):04X} {unicodedata.name(char, fallback)}"


def name_problem(name: str) -> str | None:
    """Why `name` may not be a person's name (None when it may)."""
    for char in name:
        category = unicodedata.category(char)
        if category in ("Cc", "Cf", "Zl", "Zp", "Co", "Cs", "Cn") or (
                category == "Zs" and char != " "):
            return f"contains {char_label(char)}, an invisible, control or unusual space character"
    scripts: dict[str, str] = {}
    for char in name:
        if unicodedata.category(char).startswith("L"):
            script = unicodedata.name(char, "").split(" ")[0]
            if script in _MIXED:
                scripts.setdefault(script, char)
    if len(scripts) > 1:
        odd = [c for s, c in sorted(scripts.items()) if s != "LATIN"][0]
        return (f"mixes letters of {' and '.join(sorted(scripts))} "
                f"(e.g. {char_label(odd)}), which can look like another name")
    return None


def skeleton(name: str) -> str:
    """The form in which two names count as the same: NFKC, case-folded, single spaces,
    Cyrillic and Greek look-alikes of Latin letters replaced by those letters."""
    folded = unicodedata.normalize("NFKC", name).casefold()
    return " ".join(folded.translate(_LOOK_ALIKES).split())
