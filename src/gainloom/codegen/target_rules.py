"""Coding-rule check of the generated C: cppcheck with its MISRA C:2012 addon.

:func:`check_rules` runs ``cppcheck --enable=all --addon=misra`` on the
generated source (and through it the header) as C99 for a 32-bit target
(``--platform=unix32``: 32-bit ``int`` and ``long``, as on a Cortex-M), and
cppcheck's unused-function check once more with a caller of the public
functions (the emulator measurement program), so that "function never used"
speaks only of functions nobody calls.  Findings in the caller are not
reported.  ``missingIncludeSystem`` is suppressed: the C library's headers
are the toolchain's, not ours, and cppcheck has its own model of them.

Every remaining finding must be a MISRA rule with a deviation record in
:data:`DEVIATIONS` (documented, with the same reasons, in docs/codegen.md);
anything else fails the check.  The addon is run without the rule texts
(they are licensed with the standard and not shipped), so findings name the
rule number only.
"""

from __future__ import annotations

import re
import subprocess
from collections import Counter
from dataclasses import dataclass, field
from pathlib import Path

__all__ = ["DEVIATIONS", "RuleFinding", "RulesResult", "check_rules"]

#: MISRA C:2012 rules the generated C deviates from, with the reason
#: (category from memory of the standard's rule list).
DEVIATIONS: dict[str, str] = {
    "misra-c2012-2.3": (
        "advisory, unused type declaration: under C99 each compile-time check of the table sizes is a "
        "typedef of an array whose size is negative when the check fails; the typedef exists only to be "
        "checked, never to be used (under C11 the same check is a _Static_assert)"
    ),
    "misra-c2012-2.5": (
        "advisory, unused macro: the header's length and fraction-bit macros are the interface for the "
        "integrator's code (buffer sizes, scaling), not used inside the generated file itself"
    ),
    "misra-c2012-8.9": (
        "advisory, object defined at block scope: each axis and coefficient table stays at file scope "
        "under its own name, so that the map file, nm and the verification log show its size and place; "
        "the generated code is the same"
    ),
    "misra-c2012-10.1": (
        "required, operand of inappropriate essential type: the rounding helpers take their shift count as "
        "an int, and the interpolation weight's one is the signed constant 1 shifted left by the weight's "
        "fraction bits; every shift count is a constant of the generator between 1 and 62 and every value "
        "shifted is non-negative, so no shift is undefined or implementation-defined (the host harness runs "
        "them under UndefinedBehaviorSanitizer)"
    ),
    "misra-c2012-10.3": (
        "required, assignment to a narrower or different essential type: the saturation helpers assign "
        "INT32_MIN, which <stdint.h> may define as an expression of type int, to an int32_t; on every "
        "target with a 32-bit int the two types are the same"
    ),
}

_TEMPLATE = "{file}\t{line}\t{severity}\t{id}\t{message}"
_FLAGS = (
    "--enable=all",
    "--std=c99",
    "--platform=unix32",
    "--addon=misra",
    "--suppress=missingIncludeSystem",
    "--quiet",
    f"--template={_TEMPLATE}",
)


@dataclass(frozen=True)
class RuleFinding:
    """One cppcheck finding in a generated file."""

    file: str
    line: int
    severity: str
    rule: str
    message: str

    @property
    def documented(self) -> bool:
        """A MISRA rule with a deviation record."""
        return self.rule in DEVIATIONS

    def to_dict(self) -> dict:
        return {"file": self.file, "line": self.line, "severity": self.severity, "rule": self.rule,
                "documented": self.documented}


@dataclass(frozen=True)
class RulesResult:
    """Outcome of :func:`check_rules`.

    Attributes
    ----------
    status : str
        ``passed``, ``failed`` or ``not-checked``.
    message : str
    version : str or None
        ``cppcheck --version``.
    findings : tuple of RuleFinding
        In the generated files.
    diagnostics : str
    """

    status: str
    message: str
    version: str | None = None
    findings: tuple[RuleFinding, ...] = ()
    diagnostics: str = field(default="", repr=False)

    @property
    def passed(self) -> bool | None:
        """True/False after a check; ``None`` when cppcheck or its MISRA addon is missing."""
        return None if self.status == "not-checked" else self.status == "passed"

    def deviations(self) -> dict[str, int]:
        """Documented rule -> findings in the generated files, in rule order."""
        counts = Counter(f.rule for f in self.findings if f.documented)
        return {rule: counts[rule] for rule in sorted(counts, key=_rule_order)}

    def to_dict(self) -> dict:
        return {
            "status": self.status,
            "message": self.message,
            "tool": self.version,
            "flags": list(_FLAGS[:-1]),
            "undocumented": [f.to_dict() for f in self.findings if not f.documented],
            "deviations": [{"rule": rule, "findings": count, "reason": DEVIATIONS[rule]}
                           for rule, count in self.deviations().items()],
        }


def _rule_order(rule: str) -> tuple[int, ...]:
    """``misra-c2012-10.1`` sorts after ``misra-c2012-2.3``."""
    return tuple(int(part) for part in re.findall(r"\d+", rule.removeprefix("misra-c2012-")))


def _findings(text: str, generated: set[str]) -> list[RuleFinding]:
    found = []
    for line in text.splitlines():
        parts = line.split("\t")
        if len(parts) < 5:
            continue
        name = Path(parts[0]).name
        if name in generated or parts[0] == "nofile":
            found.append(RuleFinding(name, int(parts[1]) if parts[1].isdigit() else 0, parts[2], parts[3],
                                     parts[4].strip()))
    return sorted(found, key=lambda f: (f.file, f.line, f.rule))


def check_rules(
    files: list[Path], caller: Path | None, cppcheck: str | None, defines: tuple[str, ...] = ()
) -> RulesResult:
    """Run cppcheck and its MISRA addon on the generated files.

    Parameters
    ----------
    files : list of Path
        The generated ``.c`` and ``.h`` (in one folder).
    caller : Path, optional
        A C file calling the public functions (checked along, not reported).
    cppcheck : str or None
        Path of ``cppcheck``; ``None``: not checked.
    defines : tuple of str
        ``-D`` options of the configuration to check (an unverified table's
        header stops at ``#error`` without ``-D<PREFIX>_ACCEPT_UNVERIFIED``).
    """
    if cppcheck is None:
        return RulesResult("not-checked", "not checked: cppcheck not found")
    work = files[0].parent
    version = subprocess.run([cppcheck, "--version"], capture_output=True, text=True, check=False).stdout.strip()
    sources = [f.name for f in files if f.suffix == ".c"]
    # 1. every check and the MISRA addon on the generated sources alone (headers are checked through the
    #    sources that include them; given alone a header is a translation unit of its own);
    # 2. unused functions, with a caller of the public functions (a library's functions are called by
    #    the integrator's code, not by the library).
    runs = [[*_FLAGS, *defines, "--suppress=unusedFunction", *sources]]
    if caller is not None:
        runs.append([*(f for f in _FLAGS if f != "--addon=misra"), *defines, "--enable=unusedFunction", "-I", ".", *sources,
                     str(caller)])
    stderr = ""
    for arguments in runs:
        ran = subprocess.run([cppcheck, *arguments], cwd=work, capture_output=True, text=True, timeout=300,
                             check=False)
        if ran.returncode != 0 or re.search(r"(?i)did not find addon|failed to execute addon|bailing out",
                                            ran.stderr):
            return RulesResult("not-checked", "not checked: cppcheck or its MISRA addon did not run", version,
                               diagnostics=ran.stderr[-2000:])
        stderr += ran.stderr
    findings = sorted(set(_findings(stderr, {f.name for f in files})), key=lambda f: (f.file, f.line, f.rule))
    undocumented = [f for f in findings if not f.documented]
    documented = len(findings) - len(undocumented)
    if undocumented:
        shown = "; ".join(f"{f.rule} at {f.file}:{f.line}" for f in undocumented[:4])
        more = f" and {len(undocumented) - 4} more" if len(undocumented) > 4 else ""
        return RulesResult("failed", f"{len(undocumented)} undocumented finding(s): {shown}{more}", version,
                           tuple(findings))
    rules = [rule.removeprefix("misra-c2012-") for rule in sorted({f.rule for f in findings}, key=_rule_order)]
    detail = f"; {documented} finding(s) under documented deviations ({', '.join(rules)})" if findings else ""
    return RulesResult("passed", f"cppcheck --enable=all and MISRA C:2012: no undocumented finding{detail}",
                       version, tuple(findings))
