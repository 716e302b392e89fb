"""Prints the in-process fuzz run's call counts at the end of the session (filled by test_schema_fuzz)."""

import pytest

_SUMMARY = pytest.StashKey[list]()


@pytest.fixture
def fuzz_summary(request) -> list:
    """Lines to print in the session's terminal summary."""
    return request.config.stash.setdefault(_SUMMARY, [])


def pytest_terminal_summary(terminalreporter, exitstatus, config):
    lines = config.stash.get(_SUMMARY, None)
    if lines:
        terminalreporter.section("schema fuzzing")
        for line in lines:
            terminalreporter.write_line(line)
