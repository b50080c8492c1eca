"""Rule-table hygiene (after linters' rule registries): stable unique codes, every
citation key resolvable, every bibliography entry used somewhere in the package."""

from __future__ import annotations

import re
from collections import Counter
from pathlib import Path

import pytest

import acidbase
from acidbase.compensation import BASE_EXCESS_RULES, BICARBONATE_RULES
from acidbase.references import CITATIONS
from acidbase.rules import RULES, SECTIONS, SEVERITIES

from .panels import story_2016

PACKAGE = Path(acidbase.__file__).parent


def test_every_rule_code_is_unique():
    counts = Counter(r.code for r in RULES)
    assert [c for c, n in counts.items() if n > 1] == []


def test_every_rule_code_is_a_stable_identifier():
    """Section letter, then upper-case words joined by hyphens (T-, P-, D-)."""
    prefix = {"trust": "T", "process": "P", "detail": "D"}
    bad = [r.code for r in RULES if not re.fullmatch(rf"{prefix[r.section]}(-[A-Z0-9]+)+", r.code)]
    assert bad == []


def test_every_rule_has_a_known_section_and_severity():
    assert {r.section for r in RULES} <= set(SECTIONS)
    assert {r.severity for r in RULES} <= set(SEVERITIES)


def test_every_rule_cites_at_least_one_source():
    assert [r.code for r in RULES if not r.refs] == []


@pytest.mark.parametrize("rule", RULES, ids=lambda r: r.code)
def test_every_citation_key_of_a_rule_exists(rule):
    assert [k for k in rule.refs if k not in CITATIONS] == []


@pytest.mark.parametrize(
    "rule", [*BICARBONATE_RULES.values(), *BASE_EXCESS_RULES.values()], ids=lambda r: r.key
)
def test_every_compensation_rule_cites_known_sources(rule):
    keys = (*rule.sources, *rule.band_sources)
    assert keys and [k for k in keys if k not in CITATIONS] == []


def test_every_citation_is_used_somewhere_in_the_package():
    """Each key appears (as a word) in some module other than the bibliography itself."""
    sources = [
        p.read_text(encoding="utf-8") for p in PACKAGE.rglob("*.py") if p.name != "references.py"
    ]
    unused = [
        k for k in CITATIONS if not any(re.search(rf"\b{re.escape(k)}\b", text) for text in sources)
    ]
    assert unused == []


def test_every_citation_key_matches_its_entry():
    assert [k for k, c in CITATIONS.items() if c.key != k] == []


def test_every_citation_has_a_known_evidence_label():
    # The bibliography's own labels (acidbase.references docstring).
    labels = {"seen", "secondary", "memory", "design", "practice"}
    assert {c.evidence for c in CITATIONS.values()} <= labels


def test_findings_carry_the_resolved_citations_of_their_rule(interpret):
    # Any panel will do; the Story 2016 case (E17) fires rules in all three sections.
    by_code = {r.code: r for r in RULES}
    for f in interpret(story_2016()).findings:
        assert f.citations == tuple(CITATIONS[k] for k in by_code[f.code].refs)


def test_every_output_carries_the_caution(interpret):
    r = interpret(story_2016())
    assert r.caution == acidbase.CAUTION
    assert "does not replace" in r.caution


def test_findings_are_ordered_trust_then_process_then_detail(interpret):
    # Issue 2, section 4: findings ordered trust first, then processes, then details.
    order = [SECTIONS.index(f.section) for f in interpret(story_2016()).findings]
    assert order == sorted(order)
