"""Cross-compile the generated C for a target core and read what it costs.

:func:`build_for_core` compiles the generated source with ``arm-none-eabi-gcc``
as C99 and as C11 under the host harness's strict warnings as errors
(:data:`gainloom.codegen.harness.WARNING_FLAGS`), at ``-O2`` with one section
per function and object, and reads from the C99 object:

- which runtime helpers each public function calls, directly or through a
  local function the compiler did not inline (call relocations read with
  ``arm-none-eabi-readelf -r``, undefined symbols with ``arm-none-eabi-nm``),
  each classified (:func:`helper_kind`) and judged against the core
  (:func:`helper_allowed`);
- code bytes of each function and bytes of each table (``nm --size-sort``),
  flash and RAM of the whole object (``arm-none-eabi-size``);
- stack bytes of each public function (``-fstack-usage``: its own frame plus
  the deepest chain of local functions it calls).
"""

from __future__ import annotations

import re
import subprocess
from dataclasses import dataclass
from pathlib import Path

from .harness import WARNING_FLAGS
from .target_tools import TargetCore, TargetTools

__all__ = [
    "TARGET_STANDARDS",
    "TARGET_OPTIMISATION",
    "HelperCall",
    "FunctionFigures",
    "CoreBuild",
    "helper_kind",
    "helper_allowed",
    "build_for_core",
]

#: C standards every target build is compiled as.
TARGET_STANDARDS: tuple[str, ...] = ("c99", "c11")

#: Optimisation of the target builds (figures are for this level).
TARGET_OPTIMISATION = "-O2"

_SECTION_FLAGS = ("-ffunction-sections", "-fdata-sections")

# Run-time ABI helper names: the Arm run-time ABI for the Arm architecture
# (IHI 0043, "__aeabi_" functions) and libgcc's own names (GCC internals
# manual, "The GCC low-level runtime library").
_KINDS: tuple[tuple[str, str], ...] = (
    (r"__aeabi_u?ldivmod|__u?divdi3|__u?moddi3|__u?divmoddi4", "64-bit division"),
    (r"__aeabi_u?idiv(mod)?|__u?divsi3|__u?modsi3", "32-bit division"),
    (r"__aeabi_(d\w+|[iu]2d|u?l2d|f2d)|__\w+df\d?", "double precision"),
    (r"__aeabi_(f\w+|[iu]2f|u?l2f)|__\w+sf\d?", "single precision in software"),
    (r"__aeabi_lmul|__muldi3", "64-bit multiply"),
    (r"__aeabi_(llsl|llsr|lasr)|__(ash|lsh)[lr]di3", "64-bit shift"),
    (r"__aeabi_u?lcmp|__u?cmpdi2", "64-bit compare"),
    (r"(__aeabi_)?mem(cpy|move|set|clr)\w*", "memory copy"),
)


def helper_kind(symbol: str) -> str:
    """What a called symbol the object does not define does ("other call" if unknown)."""
    for pattern, kind in _KINDS:
        if re.fullmatch(pattern, symbol):
            return kind
    return "other call"


def helper_allowed(kind: str, core: TargetCore, fixed: bool) -> bool:
    """Whether a helper of this kind is acceptable in the lookup and step on this core.

    Fixed point: none, except the 64-bit multiply on a core without a
    32 x 32 -> 64 multiply instruction (ARMv6-M has only ``muls``, so every
    Q31 product is a call there).  float32: none, except single-precision
    arithmetic in software on a core without FPU.  Division and double
    precision are never acceptable.
    """
    if fixed:
        return kind == "64-bit multiply" and not core.long_multiply
    return kind == "single precision in software" and not core.has_fpu


@dataclass(frozen=True)
class HelperCall:
    """A runtime helper a function calls."""

    symbol: str
    kind: str
    allowed: bool

    def to_dict(self) -> dict:
        return {"symbol": self.symbol, "kind": self.kind, "allowed": self.allowed}


@dataclass(frozen=True)
class FunctionFigures:
    """One public function of the generated C on one core.

    Attributes
    ----------
    name : str
    code_bytes : int
        Its own code, plus that of local functions only it calls that were
        not inlined.
    stack_bytes : int or None
        Deepest stack: own frame plus the deepest chain of local callees
        (``None`` when ``-fstack-usage`` reported nothing).
    stack_bounded : bool
        Every frame on the chain is static (``-fstack-usage``: ``static``).
    helpers : tuple of HelperCall
        Runtime helpers reached, directly or through local functions.
    """

    name: str
    code_bytes: int
    stack_bytes: int | None
    stack_bounded: bool
    helpers: tuple[HelperCall, ...]

    @property
    def clean(self) -> bool:
        """No helper call that is not acceptable on this core."""
        return all(h.allowed for h in self.helpers)

    def to_dict(self) -> dict:
        return {
            "name": self.name,
            "code_bytes": self.code_bytes,
            "stack_bytes": self.stack_bytes,
            "stack_bounded": self.stack_bounded,
            "helpers": [h.to_dict() for h in self.helpers],
        }


@dataclass(frozen=True)
class CoreBuild:
    """The generated C built for one core.

    Attributes
    ----------
    core : TargetCore
    compiled : dict of str to bool
        Standard (``c99``, ``c11``) -> compiled clean under strict warnings.
    diagnostics : str
        Compiler messages of a failed build.
    functions : tuple of FunctionFigures
        Public functions, in name order.
    tables : dict of str to int
        Bytes of each constant table (axes and coefficients).
    flash_bytes, ram_bytes : int
        Whole object: code + constants + initialised data; data + zeroed data.
    object_path : Path or None
        The C99 object (for linking the emulator programs).
    defines : tuple of str
        Compiler defines of the build (``-D<PREFIX>_ACCEPT_UNVERIFIED``),
        repeated for the programs that include the header.
    """

    core: TargetCore
    compiled: dict[str, bool]
    diagnostics: str
    functions: tuple[FunctionFigures, ...] = ()
    tables: dict[str, int] | None = None
    flash_bytes: int = 0
    ram_bytes: int = 0
    object_path: Path | None = None
    defines: tuple[str, ...] = ()

    @property
    def builds(self) -> bool:
        """Compiled clean as every standard."""
        return all(self.compiled.values())

    @property
    def helpers_clean(self) -> bool:
        """Built, and no public function calls an unacceptable helper."""
        return self.builds and all(f.clean for f in self.functions)

    def to_dict(self) -> dict:
        return {
            "core": self.core.name,
            "compiled": dict(self.compiled),
            "flags": [*self.core.flags, TARGET_OPTIMISATION, *WARNING_FLAGS],
            "functions": [f.to_dict() for f in self.functions],
            "tables": dict(self.tables or {}),
            "table_bytes": sum((self.tables or {}).values()),
            "flash_bytes": self.flash_bytes,
            "ram_bytes": self.ram_bytes,
            "diagnostics": self.diagnostics,
        }


def _run(command: list[str], cwd: Path) -> subprocess.CompletedProcess:
    return subprocess.run(command, cwd=cwd, capture_output=True, text=True, timeout=120, check=False)


def compile_flags(core: TargetCore, standard: str, defines: tuple[str, ...] = ()) -> list[str]:
    """Flags of a target compile (core, standard, optimisation, strict warnings, sections, defines)."""
    return [*core.flags, f"-std={standard}", TARGET_OPTIMISATION, *WARNING_FLAGS, *_SECTION_FLAGS, *defines]


def _symbols(tools: TargetTools, obj: Path) -> tuple[dict[str, tuple[str, int]], set[str]]:
    """Defined symbols (name -> (nm type, size)) and undefined symbol names."""
    listed = _run([tools.nm, "-S", "--size-sort", obj.name], obj.parent).stdout
    defined = {}
    for line in listed.splitlines():
        parts = line.split()
        if len(parts) == 4:
            defined[parts[3]] = (parts[2], int(parts[1], 16))
    undefined = set(_run([tools.nm, "-u", obj.name], obj.parent).stdout.split()) - {"U"}
    return defined, undefined


def _call_graph(tools: TargetTools, obj: Path) -> dict[str, set[str]]:
    """Function -> symbols it calls or jumps to (from the call relocations of its section)."""
    text = _run([tools.readelf, "-rW", obj.name], obj.parent).stdout
    graph: dict[str, set[str]] = {}
    current = None
    for line in text.splitlines():
        header = re.match(r"Relocation section '\.rel\.text\.(\S+)'", line)
        if header:
            current = header.group(1)
            graph.setdefault(current, set())
        elif current and re.search(r"R_ARM_THM_(CALL|JUMP24|JUMP11|JUMP8)|R_ARM_CALL|R_ARM_JUMP24", line):
            target = line.split()[-1]
            graph[current].add(target.removeprefix(".text."))
    return graph


def _stack_usage(su_file: Path) -> dict[str, tuple[int, bool]]:
    """Function -> (frame bytes, static) from a ``-fstack-usage`` file."""
    usage = {}
    if su_file.exists():
        for line in su_file.read_text(encoding="utf-8").splitlines():
            where, size, kind = line.rsplit("\t", 2)
            usage[where.rsplit(":", 1)[-1]] = (int(size), kind.strip() == "static")
    return usage


def _reach(name: str, graph: dict[str, set[str]], local: set[str], seen: frozenset = frozenset()) -> set[str]:
    """Every symbol ``name`` calls, following local functions."""
    found = set()
    for callee in graph.get(name, ()):
        found.add(callee)
        if callee in local and callee not in seen:
            found |= _reach(callee, graph, local, seen | {name})
    return found


def _deepest(name: str, graph: dict, local: set[str], usage: dict, seen: frozenset = frozenset()):
    frame, bounded = usage.get(name, (0, True))
    below, below_bounded = 0, True
    for callee in graph.get(name, ()):
        if callee in local and callee not in seen:
            depth, ok = _deepest(callee, graph, local, usage, seen | {name})
            below, below_bounded = max(below, depth), below_bounded and ok
    return frame + below, bounded and below_bounded


def _figures(tools: TargetTools, core: TargetCore, obj: Path, fixed: bool) -> tuple:
    defined, undefined = _symbols(tools, obj)
    graph = _call_graph(tools, obj)
    usage = _stack_usage(obj.with_suffix(".su"))
    public = sorted(n for n, (kind, _) in defined.items() if kind == "T")
    local = {n for n, (kind, _) in defined.items() if kind == "t"}
    functions = []
    for name in public:
        reached = _reach(name, graph, local)
        helpers = tuple(
            HelperCall(s, helper_kind(s), helper_allowed(helper_kind(s), core, fixed))
            for s in sorted(reached & undefined)
        )
        code = defined[name][1] + sum(defined[n][1] for n in reached & local)
        stack, bounded = _deepest(name, graph, local, usage) if usage else (None, False)
        functions.append(FunctionFigures(name, code, stack, bounded, helpers))
    tables = {n: size for n, (kind, size) in sorted(defined.items()) if kind in ("r", "R")}
    sizes = _run([tools.size, obj.name], obj.parent).stdout.splitlines()[-1].split()
    text, data, bss = (int(v) for v in sizes[:3])
    return tuple(functions), tables, text + data, data + bss


def build_for_core(
    tools: TargetTools, core: TargetCore, sources: list[Path], work: Path, fixed: bool,
    defines: tuple[str, ...] = (),
) -> CoreBuild:
    """Compile the generated sources for one core (in ``work``, which holds them) and read the object.

    Parameters
    ----------
    tools : TargetTools
        Must be able to build (:attr:`TargetTools.can_build`).
    core : TargetCore
    sources : list of Path
        The generated ``.c`` files, inside ``work``.
    work : Path
        Scratch folder; objects are written as ``<core>-<stem>.o``.
    fixed : bool
        Fixed-point variant (decides which helpers are acceptable).

    Returns
    -------
    CoreBuild
    """
    compiled, diagnostics = {}, []
    objects = []
    for standard in TARGET_STANDARDS:
        ok = True
        for source in sources:
            obj = work / f"{core.name}-{standard}-{source.stem}.o"
            flags = compile_flags(core, standard, defines)
            if standard == TARGET_STANDARDS[0]:
                flags.append("-fstack-usage")
            built = _run([tools.gcc, *flags, "-c", source.name, "-o", obj.name], work)
            if built.returncode != 0:
                ok = False
                diagnostics.append(f"{core.name} {standard}: {built.stderr.strip()}")
            elif standard == TARGET_STANDARDS[0]:
                objects.append(obj)
        compiled[standard] = ok
    if not all(compiled.values()) or len(objects) != 1:
        return CoreBuild(core, compiled, "\n".join(diagnostics), defines=defines)
    functions, tables, flash, ram = _figures(tools, core, objects[0], fixed)
    return CoreBuild(core, compiled, "", functions, tables, flash, ram, objects[0], defines)
