"""Every rule in the table fires on its own example panels and stays quiet on the others
(the examples live in the registry, ``acidbase.rule_examples``, and in docs/rules.md).

The examples are built on the band edges each rule cites (see the rule's sources); this
test checks that the table and its examples agree, so a rule whose predicate breaks fails
here by code."""

from __future__ import annotations

import pytest

import acidbase
from acidbase.rule_examples import ALWAYS
from acidbase.rules import RULES

CASES = [(r.code, kind, i, ex) for r in RULES
         for kind, exs in (("fires", r.fires), ("quiet", r.quiet)) for i, ex in enumerate(exs)]


def _read(example: dict) -> acidbase.Interpretation:
    fields = dict(example)
    settings = fields.pop("settings", None)
    return acidbase.interpret(acidbase.Panel(**fields),
                              acidbase.Settings(**settings) if settings else None)


@pytest.mark.parametrize("rule", RULES, ids=lambda r: r.code)
def test_every_rule_has_an_example_where_it_fires_and_one_where_it_stays_quiet(rule):
    assert rule.fires
    assert rule.quiet or rule.code in ALWAYS


@pytest.mark.parametrize(("code", "kind", "index", "example"), CASES,
                         ids=[f"{c}-{k}-{i}" for c, k, i, _ in CASES])
def test_rule_fires_or_stays_quiet_on_its_example(code, kind, index, example):
    assert (code in _read(example).codes()) is (kind == "fires")
