"""design layer (see DEVELOPERS.md): controller structures, per-point gain
selection by root-locus methods, whole-table checks, the gain table and the
gains file.

The entry point is :func:`gainloom.design_table` (:func:`gainloom.design.engine.design`).
"""
