"""design layer (see DEVELOPERS.md): controller structures, per-point gain
selection by root-locus methods, whole-table checks, the gain table and the
gains file.

The package is also callable: ``gainloom.design(schedule)`` runs
:func:`gainloom.design.engine.design` (the package keeps its submodules
importable, e.g. ``import gainloom.design.table``, which a plain function of
the same name would hide).
"""

from __future__ import annotations

import sys
import types


class _CallableModule(types.ModuleType):
    """The ``gainloom.design`` package, callable as the design entry point."""

    def __call__(self, schedule, progress=None):
        """Design the gain table of a schedule (see :func:`gainloom.design.engine.design`).

        Parameters
        ----------
        schedule : Schedule or str or Path
            A loaded schedule or the path of a schedule file.
        progress : callable, optional
            ``progress(stage, done, total)``.

        Returns
        -------
        DesignResult
        """
        from .engine import design

        return design(schedule, progress)


sys.modules[__name__].__class__ = _CallableModule
