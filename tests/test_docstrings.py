"""Docstring contract of the model functions (STYLE §3): every parameter documented with its
unit in brackets, a Returns section with a unit, a References section naming the source."""

from __future__ import annotations

import importlib
import inspect
import pkgutil
import re

import pytest

import lossbudget.losses
import lossbudget.topologies

MODULES = ["lossbudget.waveforms", "lossbudget.thermal"] + [
    m.name for pkg in (lossbudget.losses, lossbudget.topologies)
    for m in pkgutil.iter_modules(pkg.__path__, pkg.__name__ + ".")
]


def _public_functions():
    for name in MODULES:
        module = importlib.import_module(name)
        for fname, func in inspect.getmembers(module, inspect.isfunction):
            if func.__module__ == name and not fname.startswith("_"):
                yield f"{name}.{fname}", func


def _sections(doc: str) -> dict[str, list[str]]:
    lines = inspect.cleandoc(doc).splitlines()
    out: dict[str, list[str]] = {}
    current = "summary"
    for k, line in enumerate(lines):
        if k + 1 < len(lines) and re.fullmatch(r"-{3,}", lines[k + 1].strip()) and line.strip():
            current = line.strip()
            out[current] = []
            continue
        if re.fullmatch(r"-{3,}", line.strip()):
            continue
        out.setdefault(current, []).append(line)
    return out


def _entries(lines: list[str]) -> dict[str, str]:
    """Map each documented name to its description text."""
    entries: dict[str, str] = {}
    names: list[str] = []
    for line in lines:
        if line and not line.startswith(" "):
            names = [n.strip() for n in line.split(":")[0].split(",")]
            for n in names:
                entries[n] = ""
        elif names:
            for n in names:
                entries[n] += " " + line.strip()
    return entries


FUNCTIONS = list(_public_functions())


def test_there_are_functions_to_check():
    assert len(FUNCTIONS) > 40


@pytest.mark.parametrize(("qualname", "func"), FUNCTIONS, ids=[q for q, _ in FUNCTIONS])
def test_docstring_has_units_and_references(qualname, func):
    doc = func.__doc__
    assert doc, f"{qualname}: no docstring"
    summary = inspect.cleandoc(doc).splitlines()[0]
    assert len(summary) <= 75, f"{qualname}: summary line too long"
    sections = _sections(doc)
    assert "References" in sections, f"{qualname}: no References section"
    assert any(line.strip() for line in sections["References"])
    params = [p for p in inspect.signature(func).parameters.values()
              if p.kind not in (p.VAR_POSITIONAL, p.VAR_KEYWORD)]
    documented = _entries(sections.get("Parameters", []))
    for p in params:
        assert p.name in documented, f"{qualname}: parameter {p.name} not documented"
        assert re.search(r"\[[^\]]*\]\s*$", documented[p.name].strip()), (
            f"{qualname}: parameter {p.name} has no [unit] at the end of its description")
    returns = " ".join(sections.get("Returns", []))
    assert re.search(r"\[[^\]]*\]", returns), f"{qualname}: Returns has no [unit]"
