"""Property-based fuzz of every promise of the README (see tests/fuzzing.py), derandomized: the same
cases on every run and in CI. ``make fuzz`` runs the same targets with ten thousand cases or more."""

import pytest
from hypothesis import HealthCheck, given, settings

import fuzzing
from fuzzing import Workspace, check, cli_cases, sigmf_cases, spec_cases, wav_cases

# cases per target in make test: 1000 in all
SUITE_CASES = {"sigmf": 250, "spec": 250, "cli": 350, "wav": 150}
_SETTINGS = dict(derandomize=True, deadline=None, database=None, print_blob=True,
                 suppress_health_check=[HealthCheck.function_scoped_fixture, HealthCheck.too_slow,
                                        HealthCheck.data_too_large, HealthCheck.filter_too_much])


@pytest.fixture(scope="module")
def ws(tmp_path_factory):
    fuzzing.STRICT = True
    return Workspace(tmp_path_factory.mktemp("fuzz"))


@settings(max_examples=SUITE_CASES["sigmf"], **_SETTINGS)
@given(case=sigmf_cases())
def test_fuzz_sigmf_metadata(ws, case):
    check(ws, "sigmf", case)


@settings(max_examples=SUITE_CASES["spec"], **_SETTINGS)
@given(case=spec_cases())
def test_fuzz_chain_specs(ws, case):
    check(ws, "spec", case)


@settings(max_examples=SUITE_CASES["cli"], **_SETTINGS)
@given(case=cli_cases())
def test_fuzz_command_line(ws, case):
    check(ws, "cli", case)


@settings(max_examples=SUITE_CASES["wav"], **_SETTINGS)
@given(case=wav_cases())
def test_fuzz_damaged_wav_captures(ws, case):
    check(ws, "wav", case)


def test_fuzz_reaches_both_outcomes(ws):
    """The fuzz is not all errors (or all accepted): both outcomes occur for every target."""
    got = {(t, o) for (t, o) in fuzzing.OUTCOMES}
    for target in SUITE_CASES:
        assert (target, "error") in got and (target, "accepted") in got, sorted(fuzzing.OUTCOMES.items())
