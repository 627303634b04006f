"""Property-based fuzzing of every file rig reads and of its command line: no traceback ever, and
every problem names its file and a key or line.  10,600 generated cases in all (the sum of
``CASES``); derandomized, so CI sees the same cases each time.  See ``fuzz_inputs`` for the inputs.
"""

from __future__ import annotations

from typing import Any

import pytest
from fuzz_inputs import MALFORMED, TARGETS, Mistake, check_mistake
from hypothesis import HealthCheck, given, settings

CASES = {
    "sequence_documents": 2500,
    "sequence_mutations": 1500,
    "fixture": 1000,
    "unit": 1500,
    "station": 800,
    "wire_list": 1000,
    "fault_specs": 1500,
    "cli": 800,
}
FUZZ_CASES = sum(CASES.values())


def fuzz_settings(examples: int) -> settings:
    return settings(
        max_examples=examples,
        deadline=None,
        derandomize=True,
        database=None,
        suppress_health_check=list(HealthCheck),
    )


def test_every_target_is_fuzzed_and_the_total_reaches_ten_thousand() -> None:
    assert set(CASES) == set(TARGETS)
    assert FUZZ_CASES >= 10_000


@pytest.mark.slow
@pytest.mark.timeout(900)
@pytest.mark.parametrize("name", sorted(CASES))
def test_no_traceback_and_every_problem_located(name: str) -> None:
    strategy, check = TARGETS[name]
    ran = []

    @fuzz_settings(CASES[name])
    @given(strategy)
    def case(value: Any) -> None:
        ran.append(1)
        assert check(value) is None

    case()
    assert len(ran) >= CASES[name] // 2, "hypothesis ran far fewer cases than asked"


@pytest.mark.parametrize("mistake", MALFORMED, ids=lambda m: m.name)
def test_each_mistake_of_a_trial_is_one_problem_where_it_is(mistake: Mistake) -> None:
    assert check_mistake(mistake) is None
