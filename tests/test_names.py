"""Matching keys of compound names and fuzzy ranking.

The spelling variants are facts of the trade (common practice, no single
source): Greek letters written out, (E)/(Z) versus trans/cis for double
bonds, locants such as "1,8-", hyphens and spaces used interchangeably.
"""

from __future__ import annotations

import pytest
from hypothesis import given, strategies as st

from matcher.chem.names import matching_key, rank, search_text

SAME = [
    ("α-pinene", "alpha-pinene", "Alpha Pinene", "ALPHA-PINENE", "alpha pinene"),
    ("β-caryophyllene", "beta-caryophyllene", "ß-caryophyllene"),
    ("(E)-β-ocimene", "trans-β-ocimene", "E-beta-ocimene", "(e)-beta ocimene"),
    ("(Z)-3-hexenol", "cis-3-hexenol", "Z-3-Hexenol"),
    ("1,8-cineole", "1,8 cineole", "1,8-Cineole"),
    ("γ-terpinene", "gamma-terpinene"),
    ("δ-3-carene", "delta-3-carene", "δ 3 carene"),
    ("p-cymene", "para-cymene"),
    ("(E,E)-α-farnesene", "(E, E)-alpha-farnesene"),
    ("linalool", "linalool\u00a0", " Linalool"),
    ("α-pinene", "α-pinene"),  # NFC (precomposed) vs NFD text would also agree
]

DIFFERENT = [
    ("cis-β-ocimene", "trans-β-ocimene"),
    ("(Z)-β-ocimene", "(E)-β-ocimene"),
    ("1,8-cineole", "1,4-cineole"),
    ("α-pinene", "β-pinene"),
    ("(+)-limonene", "(-)-limonene"),
    ("2-nonanone", "3-nonanone"),
    ("1-octanol", "2-octanol"),
]


@pytest.mark.parametrize("group", SAME)
def test_variants_share_one_key(group):
    keys = {matching_key(n) for n in group}
    assert len(keys) == 1, keys


@pytest.mark.parametrize("a,b", DIFFERENT)
def test_isomers_stay_apart(a, b):
    assert matching_key(a) != matching_key(b)


def test_key_values():
    assert matching_key("(E)-β-Ocimene") == "ebetaocimene"
    assert matching_key("1,8-Cineole") == "1,8cineole"
    assert search_text("α-Pinene") == "alpha pinene"


NAMES = ["α-pinene", "β-pinene", "limonene", "linalool", "linalyl acetate", "1,8-cineole",
         "1,4-cineole", "(E)-β-ocimene", "(Z)-β-ocimene", "β-caryophyllene", "terpinen-4-ol", "geranyl acetate"]


@pytest.mark.parametrize("query,expected", [
    ("linalol", "linalool"),            # typo, one letter missing
    ("limonen", "limonene"),
    ("a-pinene", "α-pinene"),           # 'a' typed for alpha
    ("alpha pinene", "α-pinene"),
    ("trans-beta-ocimene", "(E)-β-ocimene"),
    ("1,8 cineol", "1,8-cineole"),
    ("beta caryophylene", "β-caryophyllene"),
    ("terpinen 4 ol", "terpinen-4-ol"),
    ("geranylacetate", "geranyl acetate"),
])
def test_rank_finds_variants(query, expected):
    best = rank(query, NAMES, limit=1)
    assert NAMES[best[0][0]] == expected, (query, [(NAMES[i], s) for i, s in rank(query, NAMES, limit=3)])


def test_exact_key_scores_100_and_ranks_first():
    res = rank("ALPHA-PINENE", NAMES, limit=3)
    assert NAMES[res[0][0]] == "α-pinene" and res[0][1] == 100.0
    assert res[1][1] < 100.0


# --- properties (hypothesis) --------------------------------------------------------------

words = st.text(alphabet=st.sampled_from(list("abcdefghijklmnopqrstuvwxyz0123456789,αβγδ")), min_size=1, max_size=12)
seps = st.sampled_from([" ", "-", "  ", " - "])


@given(st.lists(words, min_size=1, max_size=4), st.lists(seps, min_size=3, max_size=3))
def test_separators_and_case_never_matter(parts, sep):
    a = "-".join(parts)
    b = sep[0].join(p.upper() for p in parts)
    assert matching_key(a) == matching_key(b)


@given(st.text(max_size=40))
def test_key_is_idempotent_on_search_text(text):
    k = matching_key(text)
    assert matching_key(search_text(text)) == k
    assert " " not in k and "-" not in k


@given(st.text(max_size=30))
def test_greek_letters_equal_their_names(text):
    assert matching_key("α" + text) == matching_key("alpha" + text)


def test_greek_shorthand_with_a_typo_prefers_the_right_letter():
    # chemists' shorthand: "a-" for alpha (common practice, no single source)
    from matcher.chem.names import rank

    choices = ["β-pinene", "α-pinene", "limonene"]
    assert rank("a-pinen", choices, limit=1)[0][0] == 1
    assert rank("b-pinene", choices, limit=1)[0][0] == 0
