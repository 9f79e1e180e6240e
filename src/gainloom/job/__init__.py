"""job layer (see DEVELOPERS.md): the whole jobs the CLI runs, from a schedule
file to a checked output folder (design, cascade, product family).

It sits between the library (``schedule``, ``design``, ``codegen``,
``simulation``, ``report``) and the CLI: it calls each stage in order, keeps
their verdicts and writes every file once at the end; ``report`` only renders.
"""
