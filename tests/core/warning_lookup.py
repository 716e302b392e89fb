"""A helper shared by the core tests that read a description's warnings; no tests here."""

from __future__ import annotations


def codes_by_descriptor(description) -> dict[str, set[str]]:
    """Each descriptor (or member) a warning names -> the codes of the warnings that name it."""
    named: dict[str, set[str]] = {}
    for note in description.warnings:
        for name in note.descriptors:
            named.setdefault(name, set()).add(note.code)
    return named
