"""The malformed-input corpus (tests/data/corpus/, cases.toml): every input gives the exit
status and the words stated for it, no traceback, no silent misreading, and leaves on disk what
it should."""

from __future__ import annotations

import pytest

from corpus import cases, run_case

CASES = cases()


def test_the_corpus_holds_at_least_sixty_inputs_over_every_kind():
    kinds = {c.kind for c in CASES}
    assert len(CASES) >= 60 and kinds == {"weather", "lab", "config", "model", "store"}


@pytest.mark.parametrize("case", CASES, ids=[c.id for c in CASES])
def test_corpus_input(case, tmp_path, request):
    demo_site = request.getfixturevalue("demo_site") if case.kind in ("model", "store") else None
    outcome = run_case(case, tmp_path / "case", demo_site)
    assert not outcome.traceback, outcome.output
    assert outcome.misread == [], outcome.output
    assert outcome.wrong == [], outcome.output
