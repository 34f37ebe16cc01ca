"""lossbudget: efficiency and thermal loss budgets for switched-mode DC-DC converters.

Public API: :func:`load_design`, :func:`solve`, :func:`sweep`, :func:`check_limits`,
:func:`write_workbook`, :func:`variants` (design variants: parts files, varied keys),
:func:`compare` (ranking the variants), :func:`calibrate`, :class:`DesignError`.
``import lossbudget`` loads the engine with numpy only; scipy, pandas, matplotlib, openpyxl and
tomlkit load when a function needs them.
"""

from __future__ import annotations

from typing import Any

__version__ = "0.1.0"

from lossbudget.budget import Budget
from lossbudget.design import Design, load_design
from lossbudget.errors import DesignError
from lossbudget.factorial import Variants, variants
from lossbudget.solver import solve
from lossbudget.sweep import sweep

_LAZY = {
    "check_limits": ("lossbudget.limits", "check_limits"),
    "LimitReport": ("lossbudget.limits", "LimitReport"),
    "write_workbook": ("lossbudget.output.workbook", "write_workbook"),
    "compare": ("lossbudget.ranking", "compare"),
    "calibrate": ("lossbudget.calibration", "calibrate"),
    "Calibration": ("lossbudget.calibration", "Calibration"),
}


def __getattr__(name: str) -> Any:
    if name in _LAZY:
        import importlib

        module, attr = _LAZY[name]
        return getattr(importlib.import_module(module), attr)
    raise AttributeError(f"module 'lossbudget' has no attribute {name!r}")


__all__ = [
    "Budget",
    "Design",
    "DesignError",
    "Variants",
    "__version__",
    "load_design",
    "solve",
    "sweep",
    "variants",
    *_LAZY,
]
