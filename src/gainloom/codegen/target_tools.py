"""The target cores the generated C is checked for, and the tools that check it.

Two cores cover what motor-drive firmware runs on: one without FPU and
without a 32 x 32 -> 64 multiply (Cortex-M0+, ARMv6-M) and one with a
single-precision FPU (Cortex-M4F, ARMv7E-M, fpv4-sp-d16, hard-float ABI).
Each is run on a board model of ``qemu-system-arm``:

- Cortex-M0+ builds run on the ``microbit`` board, qemu's Cortex-M0 model:
  ARMv6-M, the same instruction set as the M0+ (an ARMv7-M instruction
  would fault there), 256 KiB flash at 0, 16 KiB RAM at 0x20000000;
- Cortex-M4F builds run on ``mps2-an386`` (Cortex-M4 with FPU).

Every tool is looked up on ``PATH``; a missing one makes the stages that need
it "not checked", never passed.
"""

from __future__ import annotations

import functools
import shutil
import subprocess
from dataclasses import dataclass

__all__ = ["TargetCore", "CORES", "TargetTools", "find_target_tools"]


@dataclass(frozen=True)
class TargetCore:
    """One target core.

    Attributes
    ----------
    name : str
        Our name of the core (``cortex-m0plus``, ``cortex-m4f``).
    label : str
        For reports.
    flags : tuple of str
        ``arm-none-eabi-gcc`` code-generation flags.
    machine : str
        ``qemu-system-arm -M`` board model the build runs on.
    machine_note : str
        What that board models, for the log.
    has_fpu : bool
        Single-precision floating point in hardware.
    long_multiply : bool
        Has a 32 x 32 -> 64 multiply instruction (``smull``/``umull``).
    """

    name: str
    label: str
    flags: tuple[str, ...]
    machine: str
    machine_note: str
    has_fpu: bool
    long_multiply: bool


#: The cores every generated table is built and run for.
CORES: tuple[TargetCore, ...] = (
    TargetCore(
        "cortex-m0plus",
        "Cortex-M0+ (no FPU)",
        ("-mcpu=cortex-m0plus", "-mthumb", "-mfloat-abi=soft"),
        "microbit",
        "qemu microbit board, Cortex-M0 model (ARMv6-M, the M0+ instruction set)",
        has_fpu=False,
        long_multiply=False,
    ),
    TargetCore(
        "cortex-m4f",
        "Cortex-M4F (fpv4-sp-d16, hard float)",
        ("-mcpu=cortex-m4", "-mthumb", "-mfpu=fpv4-sp-d16", "-mfloat-abi=hard"),
        "mps2-an386",
        "qemu mps2-an386 board, Cortex-M4 with single-precision FPU",
        has_fpu=True,
        long_multiply=True,
    ),
)

_PROGRAMS = {
    "gcc": "arm-none-eabi-gcc",
    "nm": "arm-none-eabi-nm",
    "size": "arm-none-eabi-size",
    "readelf": "arm-none-eabi-readelf",
    "qemu": "qemu-system-arm",
    "cppcheck": "cppcheck",
}


@dataclass(frozen=True)
class TargetTools:
    """Paths of the target tools found on ``PATH`` (``None`` when missing).

    Attributes
    ----------
    gcc, nm, size, readelf : str or None
        The GNU Arm embedded toolchain (Debian ``gcc-arm-none-eabi``,
        ``binutils-arm-none-eabi``).
    qemu : str or None
        ``qemu-system-arm`` (Debian ``qemu-system-arm``).
    cppcheck : str or None
        ``cppcheck`` with its MISRA C:2012 addon (Debian ``cppcheck``).
    """

    gcc: str | None
    nm: str | None
    size: str | None
    readelf: str | None
    qemu: str | None
    cppcheck: str | None

    @property
    def can_build(self) -> bool:
        """Cross compiler and binutils all present."""
        return None not in (self.gcc, self.nm, self.size, self.readelf)

    @property
    def can_run(self) -> bool:
        """Can build and run on the emulator."""
        return self.can_build and self.qemu is not None

    def versions(self) -> dict[str, str | None]:
        """First line of ``--version`` of the compiler and the emulator (``None`` when missing)."""
        return {"gcc": _version(self.gcc), "qemu": _version(self.qemu)}

    def missing(self, *keys: str) -> list[str]:
        """Program names among ``keys`` (all when none given) that were not found."""
        keys = keys or tuple(_PROGRAMS)
        return [_PROGRAMS[k] for k in keys if getattr(self, k) is None]


@functools.lru_cache(maxsize=8)
def _version(program: str | None) -> str | None:
    if program is None:
        return None
    ran = subprocess.run([program, "--version"], capture_output=True, text=True, timeout=30, check=False)
    lines = (ran.stdout or ran.stderr).splitlines()
    return lines[0].strip() if ran.returncode == 0 and lines else None


def find_target_tools() -> TargetTools:
    """Look every target tool up on ``PATH``."""
    return TargetTools(**{key: shutil.which(program) for key, program in _PROGRAMS.items()})
