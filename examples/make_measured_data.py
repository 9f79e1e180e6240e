"""Write the invented sweep data of schedules/measured_speed.yaml.

The truth is known here, so the tests can check what the tool makes of the
data: a servo speed loop on a test bench whose flywheels change the load
inertia (total inertia 1 to 4 times the motor's).  Plant from the q-axis
current reference (A) to the measured speed (rad/s):

    P(s) = Kt / ((J s + B) (tau_i s + 1)) exp(-s Td),  J = Jm * load

with the closed current loop as a first-order lag and ``Td`` the speed
measurement's dead time.  Every number is invented.  The "measurement" adds
1 % magnitude and 0.5 deg phase noise (seeded: the files are the same on
every run) and three bad samples, as a real sweep has: a spike, a drop-out
and a phase glitch.

Run: python examples/make_measured_data.py [OUT_DIR]   (default schedules/measured_speed)
"""

from __future__ import annotations

import sys
from pathlib import Path

import numpy as np

#: The invented plant (SI units) and the sweep.
TRUTH = {"Kt": 0.35, "Jm": 2.5e-3, "B": 5.0e-3, "tau_i": 5.0e-4, "Td": 1.5e-4}
LOADS = (1.0, 2.0, 3.0, 4.0)
SWEEP_HZ = (0.5, 2000.0)
PER_DECADE = 25
NOISE = {"magnitude": 0.01, "phase_deg": 0.5}
SEED = 20261203
#: (load, sample index, factor): an isolated bad sample per listed point.
BAD_SAMPLES = ((1.0, 7, 3.0), (2.0, 80, 0.25), (4.0, 85, np.exp(1j * np.radians(35.0))))


def frequencies_hz() -> np.ndarray:
    """The sweep's frequencies, logarithmically spaced, Hz."""
    decades = np.log10(SWEEP_HZ[1] / SWEEP_HZ[0])
    return np.geomspace(*SWEEP_HZ, round(decades * PER_DECADE) + 1)


def true_response(load: float, f_hz: np.ndarray) -> np.ndarray:
    """The invented plant's response at ``f_hz``."""
    s = 2j * np.pi * f_hz
    t = TRUTH
    return t["Kt"] / ((t["Jm"] * load * s + t["B"]) * (t["tau_i"] * s + 1)) * np.exp(-s * t["Td"])


def measured_response(load: float, f_hz: np.ndarray, rng: np.random.Generator) -> np.ndarray:
    """The true response with noise and the listed bad samples."""
    h = true_response(load, f_hz)
    h = h * (1 + NOISE["magnitude"] * rng.standard_normal(h.size))
    h = h * np.exp(1j * np.radians(NOISE["phase_deg"]) * rng.standard_normal(h.size))
    for bad_load, index, factor in BAD_SAMPLES:
        if bad_load == load:
            h[index] *= factor
    return h


def file_name(load: float) -> str:
    return f"load_{load:g}.csv"


def write(out: Path) -> list[Path]:
    """Write one CSV per load into ``out``; returns the paths."""
    out.mkdir(parents=True, exist_ok=True)
    rng = np.random.default_rng(SEED)
    f_hz = frequencies_hz()
    written = []
    for load in LOADS:
        h = measured_response(load, f_hz, rng)
        lines = [
            "# Invented sweep (examples/make_measured_data.py): servo speed loop, q-axis current",
            f"# reference (A) to speed (rad/s), load inertia {load:g} x motor.  Not a real machine.",
            "frequency [Hz],magnitude [dB],phase [deg]",
        ]
        lines += [f"{f:.6g},{20 * np.log10(abs(v)):.5f},{np.degrees(np.angle(v)):.4f}" for f, v in zip(f_hz, h)]
        path = out / file_name(load)
        path.write_text("\n".join(lines) + "\n", encoding="utf-8")
        written.append(path)
    return written


if __name__ == "__main__":
    target = Path(sys.argv[1]) if len(sys.argv) > 1 else Path(__file__).resolve().parent.parent / "schedules" / "measured_speed"
    for path in write(target):
        print(path)
