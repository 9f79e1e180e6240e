"""codegen layer (see DEVELOPERS.md): number formats (float32/Q15/Q31), C from
``codegen_templates/``, and the compile + host harness that checks it against
the Python mirror."""

from .emit import emit_c, render_files
from .harness import HarnessResult, check_generated_c
from .layout import TableLayout, layout_table
from .verdict import TableVerdict, table_verdict

__all__ = [
    "emit_c",
    "render_files",
    "check_generated_c",
    "HarnessResult",
    "layout_table",
    "TableLayout",
    "TableVerdict",
    "table_verdict",
]
