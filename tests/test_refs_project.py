"""The project verifies its own stored references (tests/refs/) on every `make test`."""

from __future__ import annotations

from pathlib import Path

from sdrx.refs.cases import load_cases
from sdrx.refs.store import Store
from sdrx.testing import assert_matches_reference

REFS = Path(__file__).with_name("refs")


def test_project_references_match(tmp_path):
    # regenerate with: .venv/bin/sdrx refs record tests/refs/cases.toml --store tests/refs/store --update
    report = assert_matches_reference(REFS / "cases.toml", REFS / "store", failures_dir=tmp_path / "failures")
    assert [r.name for r in report.results] == load_cases(REFS / "cases.toml").names()


def test_project_store_is_complete_and_small():
    names = load_cases(REFS / "cases.toml").names()
    store = Store.open(REFS / "store")
    assert store.names() == sorted(names)          # no stale references, none missing
    for n in names:
        store.check_audio(n)
    total = sum(p.stat().st_size for p in REFS.rglob("*") if p.is_file())
    assert total <= 2 * 1024 * 1024, f"tests/refs holds {total} bytes; keep it under 2 MB"
