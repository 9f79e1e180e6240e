"""What a schedule, or a loop given on the command line, may ask for:
limits checked before anything is evaluated or allocated, so an absurd
input is one located error, never a hang, a ``MemoryError`` or a
``RecursionError``.  Any layer may read them (like :mod:`gainloom.names`).

Every limit is documented in ``docs/schedule-format.md`` ("Limits"); the
values are generous for motor drives and power converters (common practice,
no source) and small enough that the largest accepted schedule designs in
minutes on a laptop.
"""

from __future__ import annotations

__all__ = [
    "MAX_BETWEEN_POINTS",
    "MAX_CHECK_POINTS",
    "MAX_DELAY_SAMPLES",
    "MAX_EXPRESSION_DEPTH",
    "MAX_EXPRESSION_LENGTH",
    "MAX_FIT_POLES",
    "MAX_GAINS_BYTES",
    "MAX_OPERATING_POINTS",
    "MAX_PLANT_ORDER",
    "MAX_REFINE_INSERTED",
    "MAX_RESPONSE_BYTES",
    "MAX_RESPONSE_SAMPLES",
    "MAX_SCHEDULE_BYTES",
    "MAX_STUDY_DRAWS",
    "MAX_SWEEP_COUNT",
    "MAX_TOLERANCE_EVALUATIONS",
    "MAX_TOLERANCE_SAMPLES",
    "MAX_VARIANTS",
    "MIN_RESPONSE_SAMPLES",
    "SAMPLE_PERIOD_RANGE",
    "size_text",
]

#: Largest schedule file read, in bytes.
MAX_SCHEDULE_BYTES = 1_000_000
#: Largest gains file read, in bytes (a 20,000-point table with its analysis
#: is about 30 MB of YAML).
MAX_GAINS_BYTES = 64_000_000
#: Longest expression, in characters.
MAX_EXPRESSION_LENGTH = 1_000
#: Deepest nesting of an expression: parentheses, unary signs, operator
#: chains and calls each add a level.
MAX_EXPRESSION_DEPTH = 100
#: Most operating points of the grid (product of the axes' value counts),
#: breakpoints inserted by refinement included.
MAX_OPERATING_POINTS = 20_000
#: Most controller-zero locations of ``controller.sweep.count``.
MAX_SWEEP_COUNT = 1_000
#: Most intermediate points per interval (``table.between_points``).
MAX_BETWEEN_POINTS = 100
#: Most intermediate points the between-point check evaluates in all.
MAX_CHECK_POINTS = 200_000
#: Most breakpoints refinement may insert (``table.refine.max_inserted``).
MAX_REFINE_INSERTED = 1_000
#: Most tolerance samples (``tolerances.samples.space_filling``).
MAX_TOLERANCE_SAMPLES = 10_000
#: Most loops the tolerance check evaluates: samples x operating points.
MAX_TOLERANCE_EVALUATIONS = 2_000_000
#: Most random draws per point of the statistical study (``tolerances.samples: N``);
#: the study runs in chunks, so memory does not grow with it, only time.
MAX_STUDY_DRAWS = 10_000_000
#: Most variants (rows) of a product family's variants file (`gainloom family`).
MAX_VARIANTS = 1_000
#: Highest plant order (poles, states or denominator degree).
MAX_PLANT_ORDER = 30
#: Longest delay in samples: computation delay plus dead time / ts.  Each
#: sample is one more pole of the discrete loop.
MAX_DELAY_SAMPLES = 50
#: Sample periods accepted, seconds (1 ns to 1,000 s).
SAMPLE_PERIOD_RANGE = (1e-9, 1e3)
#: Largest frequency-response (CSV) file read, bytes.
MAX_RESPONSE_BYTES = 20_000_000
#: Most samples of a frequency-response file (all its points together).
MAX_RESPONSE_SAMPLES = 200_000
#: Fewest samples per operating point of a measured plant: below that a
#: sweep cannot show a crossover with its neighbourhood (common practice,
#: no source: about ten per decade over two decades).
MIN_RESPONSE_SAMPLES = 20
#: Highest pole count of a fitted model (``plant.measured.fit``): beyond it
#: the least-squares problem in powers of ``s`` loses its digits.
MAX_FIT_POLES = 8


def size_text(value: float) -> str:
    """A count for a message: digits grouped, or the order of magnitude of a huge one."""
    if isinstance(value, int) and abs(value) >= 10**15:
        return f"about 10^{len(str(abs(value))) - 1}"
    if isinstance(value, float) and abs(value) >= 1e15:
        return f"{value:.3g}"
    return f"{int(value):,}"
