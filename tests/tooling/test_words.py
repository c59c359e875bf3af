"""One word for each thing on every screen, file and page the tool writes.

The words are fixed in the README's "Words used here": an optimum is planted, proven
or not proven; the bred set is the winners; an edge is a coupler; outputs go to
``--out``.  Each retired word is searched for in the strings of the package itself,
so a new message cannot bring one back.
"""
import ast
from pathlib import Path

import pytest

PACKAGE = Path(__file__).resolve().parents[2] / "instgen"
# A retired word and the only modules allowed to hold it (where an old file's word is read).
RETIRED = {
    "unverified": {"records.py"},      # Certificate.LEGACY reads it as "not proven"
    "uncertified": set(),
    "NOT proven": set(),
    "NOT a proven": set(),
    "NO proven": set(),
    "not certified": set(),
    "energy units": set(),             # energies are in coupling units, or per coupling scale
    "hall of fame": set(),
    "hall_of_fame": {"preset.py"},     # the renamed key's message names its new one
}


def _strings(path):
    for node in ast.walk(ast.parse(path.read_text(), filename=str(path))):
        if isinstance(node, ast.Constant) and isinstance(node.value, str):
            yield node.value


def _holds(text, word):
    # A word typed in capitals is searched for as typed ("NOT proven" may not come back, "not proven" is the word).
    return word in text if word != word.lower() else word in text.lower()


@pytest.mark.parametrize("word", sorted(RETIRED))
def test_a_retired_word_is_in_no_message(word):
    hits = sorted({str(p.relative_to(PACKAGE)) for p in PACKAGE.rglob("*.py")
                   if p.name not in RETIRED[word] and any(_holds(s, word) for s in _strings(p))})
    assert not hits, f"{word!r} is still written by {hits}"


def test_every_sampler_says_what_it_is_in_the_help():
    # The names rotor, packed-sa, fast-sa do not explain themselves: score --help gives each a line.
    from instgen.cli import score
    from instgen.samplers import SAMPLERS, SUMMARIES

    assert set(SUMMARIES) == set(SAMPLERS.names())
    for name in SAMPLERS.names():
        assert f"  {name:<14} {SUMMARIES[name]}" in score.DESCRIPTION
    assert "rotor" in SUMMARIES["rotor"] and "64 replicas" in SUMMARIES["packed-sa"]


def test_every_reference_choice_is_explained_in_breed_help():
    # "confirm-certified" does not explain itself: breed --help says what each [fitness] reference does.
    from instgen.cli import breed
    from instgen.preset import REFERENCES

    for name in REFERENCES:
        assert f"\n  {name:<18} " in breed.DESCRIPTION, name
