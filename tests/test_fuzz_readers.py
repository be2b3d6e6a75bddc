"""Fuzzing the readers: damaged BIF text, graph files, CSV rows and configs give the package's own errors.

A small, derandomised budget here (so the suite stays quick and repeatable);
``experiments/bench/fuzz_readers.py`` runs 10,000+ inputs per reader and
records the counts. Refusing bad input with a clear error of the package's
own type is common practice (no source); the inputs are in tests/fuzz_inputs.py.
"""

from __future__ import annotations

import pytest
from hypothesis import HealthCheck, given, settings

from .fuzz_inputs import SEEDS, damaged, run_reader, scratch

BUDGET = settings(max_examples=120, deadline=None, derandomize=True, database=None,
                  suppress_health_check=[HealthCheck.too_slow, HealthCheck.data_too_large])


@pytest.mark.parametrize("reader", sorted(SEEDS))
def test_seed_documents_are_valid(reader):
    with scratch() as folder:
        assert run_reader(reader, SEEDS[reader], folder) == "accepted"


@pytest.mark.parametrize("reader", sorted(SEEDS))
def test_damaged_input_gives_only_package_errors(reader):
    with scratch() as folder:

        @BUDGET
        @given(damaged(reader))
        def check(text):
            # accepted or refused with an IntervgnnError; any other exception fails the test
            assert run_reader(reader, text, folder) in ("accepted", "refused")

        check()
