"""How names (titles, either-or sets) are compared: `name_key`.

Reference: the Unicode Standard, section 3.13, definition D146 (compatibility caseless
match), from memory; the expected foldings below are Unicode's own data as Python's
unicodedata holds it, written out by hand.
"""

from __future__ import annotations

import unicodedata

import pytest

from server.selector.set_names import KEY_MAX, SetNames, name_key


@pytest.mark.parametrize(
    ("one", "other"),
    [
        ("Fare  rules ", "fare rules"),  # spaces and case
        ("Caf\u00e9", "Cafe\u0301"),  # precomposed é against e + combining acute
        ("\uff26\uff41\uff52\uff45 rules", "Fare rules"),  # full-width letters
        ("\ufb01ling", "filing"),  # the fi ligature
        ("Stra\u00dfe", "STRASSE"),  # sharp s folds to ss
        ("\u212b ngstr\u00f6m", "\u00e5 ngstro\u0308m"),  # angstrom sign, å, ö decomposed
        ("Fare\u00a0rules", "Fare rules"),  # no-break space is white space
        ("Fare\u200b rules", "Fare rules"),  # a zero-width space is left out
        ("Fare ru\u00adles\u200d", "Fare rules"),  # a soft hyphen, a zero-width joiner
    ],
)
def test_names_that_read_the_same_have_one_key(one: str, other: str) -> None:
    assert name_key(one) == name_key(other)
    assert SetNames([one]).spelling(other) == one  # the first spelling stays


@pytest.mark.parametrize(("one", "other"), [("Fare rules", "Fare rule"), ("Café", "Cafe")])
def test_different_names_keep_different_keys(one: str, other: str) -> None:
    assert name_key(one) != name_key(other)


def test_the_key_is_unchanged_by_folding_again() -> None:
    for name in ("Ｆａｒｅ", "Cafe\u0301", "Straße", "ﬁ"):
        key = name_key(name)
        assert name_key(key) == key
        assert unicodedata.is_normalized("NFKD", key)


def test_a_long_key_is_bounded_and_still_tells_names_apart() -> None:
    # U+FDFA folds to 18 characters: 200 of them would be a 3,600-character key.
    long_one = "\ufdfa" * 200
    long_other = "\ufdfa" * 199 + "x"
    assert len(unicodedata.normalize("NFKD", long_one)) > KEY_MAX
    assert len(name_key(long_one)) == KEY_MAX
    assert name_key(long_one) != name_key(long_other)
    assert name_key(long_one) == name_key(long_one)
