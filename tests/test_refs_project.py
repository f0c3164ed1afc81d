"""The project verifies its own stored references (tests/refs/) on every `make test`."""

from __future__ import annotations

from pathlib import Path

import pytest

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


@pytest.mark.parametrize("injection, wrong", [
    ("high", lambda tune, if_hz: tune - 2 * if_hz),     # the low side's formula on the high side
    ("low", lambda tune, if_hz: tune + 2 * if_hz),      # the high side's formula on the low side
])
def test_project_references_catch_an_image_formula_sign_error(injection, wrong, monkeypatch, tmp_path):
    # mutation check: with the image frequency's sign wrong for one injection side, the fast path cuts the
    # image channel out of the wrong place (here: outside the capture) and the cases whose capture holds the
    # image must fail; the 96 kHz estuary cases cannot notice (their image lies outside their capture)
    from sdrx.chain import design as chain_design
    from sdrx.refs.verify import verify_cases

    right = chain_design.image_frequency

    def mutated(tune_hz, if_hz, inj="high"):
        return wrong(tune_hz, if_hz) if inj == injection else right(tune_hz, if_hz, inj)

    monkeypatch.setattr(chain_design, "image_frequency", mutated)
    image_case = {"high": "reach-1000-medium-image-high", "low": "reach-1800-bench-image-low"}[injection]
    blind_case = {"high": "estuary-1010-medium", "low": "estuary-1020-bench"}[injection]
    report = verify_cases(REFS / "cases.toml", REFS / "store", names=[image_case, blind_case],
                          failures_dir=tmp_path / "failures")
    status = {r.name: r.status for r in report.results}
    assert status == {image_case: "fail", blind_case: "pass"}, status
