"""Compound names: the normalised matching key, and fuzzy ranking.

Chemists write one compound many ways: ``α-pinene``, ``alpha-Pinene``,
``alpha pinene``; ``(E)-β-ocimene``, ``trans-beta-ocimene``; ``1,8-cineole``,
``1,8 cineole``. The **matching key** folds these spellings together so that
the library keeps one compound per key, while keeping apart what chemistry
keeps apart (``cis-`` and ``trans-`` isomers, ``(+)`` and ``(−)``,
different locants).

Rules, in order (common practice of the trade, no single source):

1. Unicode NFKC and case folding, then Greek letters (either case) become their names (α → alpha, β → beta,
   γ → gamma, δ → delta, ...); a German ``ß`` typed for β counts as beta.
2. Every kind of dash becomes ``-``; accents are dropped; whitespace collapses.
3. Stereo descriptors are written one way: ``(E)-``, ``E-``, ``trans-`` → ``e-``
   and ``(Z)-``, ``Z-``, ``cis-`` → ``z-`` (``(2E,6E)-`` → ``2e,6e-``);
   optical signs ``(+)``, ``(-)``, ``(±)`` become ``plus``, ``minus``, ``rac``;
   ``ortho-``, ``meta-``, ``para-`` become ``o-``, ``m-``, ``p-``.
4. The key drops spaces, hyphens, underscores, dots between words and
   brackets; commas and primes stay, so locants such as ``1,8-`` and
   ``1,4-`` remain distinct.

>>> matching_key("α-Pinene") == matching_key("alpha pinene") == matching_key("ALPHA-PINENE")
True
>>> matching_key("(E)-β-Ocimene") == matching_key("trans-beta-ocimene") == matching_key("E-β-ocimene")
True
>>> matching_key("cis-β-ocimene") == matching_key("trans-β-ocimene")
False
>>> matching_key("1,8-Cineole") == matching_key("1,8 cineole")
True
>>> matching_key("1,8-cineole") == matching_key("1,4-cineole")
False
>>> matching_key("para-Cymene") == matching_key("p-cymene")
True
>>> search_text("(Z)-3-Hexenol")
'z 3 hexenol'
"""

from __future__ import annotations

import re
import unicodedata
from typing import Sequence

GREEK: dict[str, str] = {
    "α": "alpha", "β": "beta", "γ": "gamma", "δ": "delta", "ε": "epsilon",
    "ζ": "zeta", "η": "eta", "θ": "theta", "κ": "kappa", "λ": "lambda",
    "μ": "mu", "ω": "omega", "ψ": "psi", "χ": "chi", "φ": "phi", "τ": "tau",
    "ß": "beta",  # a German sharp s is often typed for a beta
}

_DASHES = re.compile(r"[\u2010\u2011\u2012\u2013\u2014\u2015\u2212\u00ad]")
_OPTICAL = [
    (re.compile(r"\(\s*(?:±|\+\s*/\s*-|\+-|-\s*/\s*\+|rs|dl)\s*\)"), " rac "),
    (re.compile(r"\(\s*\+\s*\)"), " plus "),
    (re.compile(r"\(\s*-\s*\)"), " minus "),
]
# (E)-, (Z)-, (2E,6Z)-, (E,E)- ... : stereo descriptors in brackets
_BRACKET_EZ = re.compile(r"\(\s*((?:\d*[ez]\s*,\s*)*\d*[ez])\s*\)")
_TRANS = re.compile(r"(?<![a-z])trans(?=[\s-])")
_CIS = re.compile(r"(?<![a-z])cis(?=[\s-])")
_OMP = re.compile(r"(?<![a-z])(ortho|meta|para)(?=-)")
_KEY_DROP = re.compile(r"[\s\-_()\[\]{}.]+")
_WORDS = re.compile(r"[\s\-_()\[\]{}.]+")


def _fold(text: str) -> str:
    s = unicodedata.normalize("NFKC", str(text)).replace("ß", "beta").casefold()
    # drop accents first so that a Greek letter with a breathing or accent mark ("ἀ") is still its name
    s = "".join(ch for ch in unicodedata.normalize("NFKD", s) if not unicodedata.combining(ch))
    s = "".join(GREEK.get(ch, ch) for ch in s)
    s = _DASHES.sub("-", s)
    s = unicodedata.normalize("NFKD", s)
    s = "".join(ch for ch in s if not unicodedata.combining(ch))
    for rx, rep in _OPTICAL:
        s = rx.sub(rep, s)
    s = _BRACKET_EZ.sub(lambda m: re.sub(r"\s+", "", m.group(1)), s)
    s = _TRANS.sub("e", s)
    s = _CIS.sub("z", s)
    s = _OMP.sub(lambda m: m.group(1)[0], s)
    return " ".join(s.split())


def search_text(text: str) -> str:
    """The name folded as for the key, but with words separated by single spaces (for fuzzy search)."""
    return " ".join(w for w in _WORDS.split(_fold(text)) if w)


def matching_key(text: str) -> str:
    """The normalised matching key of a compound name (see module doc); empty for an empty name."""
    return _KEY_DROP.sub("", _fold(text))


def display_name(text: str) -> str:
    """The name as it will be stored and shown: NFC and stripped; everything inside kept literally
    (an embedded line break too; tables on the terminal show it as a space)."""
    return unicodedata.normalize("NFC", str(text)).strip()


_GREEK_SHORT = {"alpha": "a", "beta": "b", "gamma": "g", "delta": "d", "epsilon": "e"}


def short_greek_key(key: str) -> str:
    """A matching key with Greek letter names shortened to their first letter (``alphapinene`` → ``apinene``),
    so that the common shorthand ``a-pinene`` meets ``α-pinene``.

    >>> short_greek_key(matching_key("α-Pinene")), short_greek_key(matching_key("a-pinene"))
    ('apinene', 'apinene')
    """
    for long, short in _GREEK_SHORT.items():
        key = key.replace(long, short)
    return key


def rank(query: str, choices: Sequence[str], limit: int = 10, cutoff: float = 50.0) -> list[tuple[int, float]]:
    """Indices of ``choices`` ranked by similarity to ``query`` (score 0-100, best first).

    Both sides are folded with :func:`search_text`; the score is the better of
    rapidfuzz's weighted ratio on the folded texts and the plain ratio on the
    matching keys, so ``alpha pinene`` finds ``α-Pinene`` at 100 and a typo
    such as ``limonen`` still scores high.

    >>> rank("linalol", ["limonene", "linalool", "linalyl acetate"], limit=1)[0][0]
    1
    """
    from rapidfuzz import fuzz, process

    q_text, q_key = search_text(query), matching_key(query)
    texts = [search_text(c) for c in choices]
    keys = [matching_key(c) for c in choices]
    best: dict[int, float] = {}
    for res in process.extract(q_text, texts, scorer=fuzz.WRatio, limit=None, score_cutoff=cutoff):
        best[res[2]] = max(best.get(res[2], 0.0), float(res[1]))
    for res in process.extract(q_key, keys, scorer=fuzz.ratio, limit=None, score_cutoff=cutoff):
        best[res[2]] = max(best.get(res[2], 0.0), float(res[1]))
    q_short = short_greek_key(q_key)
    for res in process.extract(q_short, [short_greek_key(k) for k in keys], scorer=fuzz.ratio, limit=None,
                               score_cutoff=cutoff):
        best[res[2]] = max(best.get(res[2], 0.0), float(res[1]))
    for i, k in enumerate(keys):
        if k and k == q_key:
            best[i] = 100.0
    ordered = sorted(best.items(), key=lambda kv: (-kv[1], len(choices[kv[0]]), kv[0]))
    return ordered[:limit]


#: Similarity (0-100) of matching keys at or above which a new name counts as close to a library name
#: (our own choice: one or two letters apart in a name of ten, such as limonen / limonene).
CLOSE_SCORE = 88.0


def closeness(a: str, b: str) -> float:
    """Similarity 0-100 of two names on their matching keys (also with Greek names shortened).

    >>> closeness("limonen", "limonene") >= CLOSE_SCORE, closeness("decane", "tridecane") >= CLOSE_SCORE
    (True, False)
    >>> closeness("a-pinene", "α-pinene")
    100.0
    """
    from rapidfuzz import fuzz


    ka, kb = matching_key(a), matching_key(b)
    return float(max(fuzz.ratio(ka, kb), fuzz.ratio(short_greek_key(ka), short_greek_key(kb))))


__all__ = ["GREEK", "matching_key", "search_text", "display_name", "short_greek_key", "rank"]


#: Alkane stems by chain length (IUPAC numerical prefixes; 'eicos'/'icos' and 'heneicos'/'henicos' both read).
CHAIN_STEMS: dict[int, tuple[str, ...]] = {
    1: ("meth",), 2: ("eth",), 3: ("prop",), 4: ("but",), 5: ("pent",), 6: ("hex",), 7: ("hept",), 8: ("oct",),
    9: ("non",), 10: ("dec",), 11: ("undec",), 12: ("dodec",), 13: ("tridec",), 14: ("tetradec",),
    15: ("pentadec",), 16: ("hexadec",), 17: ("heptadec",), 18: ("octadec",), 19: ("nonadec",),
    20: ("eicos", "icos"), 21: ("heneicos", "henicos"), 22: ("docos",), 23: ("tricos",), 24: ("tetracos",),
    25: ("pentacos",), 26: ("hexacos",), 27: ("heptacos",), 28: ("octacos",), 29: ("nonacos",), 30: ("triacont",),
}


def homologue_name(member: str, shift: int) -> str | None:
    """The name of the homologue ``shift`` CH2 units away from ``member``, or None when the chain is not named.

    The chain is the longest alkane stem followed by ``an``/``en``/``yn`` (``1-heptanol``, ``decanal``,
    ``ethyl butanoate``); its stem is replaced by the stem of the new length (IUPAC numerical prefixes).

    >>> homologue_name("1-heptanol", 0), homologue_name("1-hexanol", 1), homologue_name("ethyl butanoate", 2)
    ('1-heptanol', '1-heptanol', 'ethyl hexanoate')
    >>> homologue_name("2-tridecanone", -2), homologue_name("nonadecane", 1), homologue_name("limonene", 1)
    ('2-undecanone', 'eicosane', None)
    """
    import re

    best = None
    for n, stems in CHAIN_STEMS.items():
        for stem in stems:
            for m in re.finditer(re.escape(stem) + r"(?=[aey]n)", member.lower()):
                if m.start() > 0 and member[m.start() - 1].isalpha() and not any(
                        member.lower()[:m.start()].endswith(p) for p in ("un", "do", "tri", "tetra", "penta", "hexa",
                                                                        "hepta", "octa", "nona", "hen", "e", "do")):
                    continue
                if best is None or len(stem) > len(best[1]):
                    best = (n, stem, m.start())
    if best is None:
        return None
    n, stem, at = best
    target = CHAIN_STEMS.get(n + int(shift))
    if not target:
        return None
    new = target[0]
    if member[at:at + 1].isupper():
        new = new.capitalize()
    return member[:at] + new + member[at + len(stem):]
