"""Running ngspice in batch mode on a :class:`~partpick.physics.circuit.Netlist`.

An independent check of partpick's own transient simulator: the same netlist goes
through :func:`partpick.physics.spice.to_spice`, ngspice (``ngspice -b``) runs the
transient and writes the probe voltages with ``wrdata``, and this module reads them
back as numpy arrays. ngspice is optional; callers test :func:`ngspice_available`.
"""

from __future__ import annotations

import shutil
import subprocess
import tempfile
from pathlib import Path

import numpy as np

from partpick.physics.netlist import Netlist
from partpick.physics.spice import to_spice

__all__ = ["ngspice_available", "run_ngspice"]

_EXE = "ngspice"
_PROBES = ("osc", "load")


def ngspice_available() -> bool:
    """True when an ``ngspice`` executable is on PATH."""
    return shutil.which(_EXE) is not None


def _tail(text: str, lines: int = 25) -> str:
    return "\n".join(text.strip().splitlines()[-lines:])


def run_ngspice(netlist: Netlist, *, cycles: float, points_per_cycle: int = 200, timeout_s: float = 300,
                uniform: bool = True, probes: tuple[str, ...] = _PROBES) -> tuple[np.ndarray, dict[str, np.ndarray]]:
    """Transient run of ``cycles`` periods of netlist.f_hint_hz in ngspice.

    Returns (time_s, {"osc": v_osc, "load": v_load, ...}): time in s, voltages in V at
    the netlist's probe nodes named in ``probes`` (default 'osc' and 'load'; 'load2',
    a second output's load, where the netlist has one; 'x:NAME', the internal node of
    op-amp NAME that its output clamp holds: :func:`partpick.physics.spice.to_spice`).
    With ``uniform`` (default) the points lie on the grid 0, dt, 2 dt, ... with dt =
    1/(f_hint points_per_cycle) s (ngspice's ``linearize``: linear interpolation of the
    accepted time points, which are at most dt apart); otherwise ngspice's own, uneven
    time points are returned.

    Raises RuntimeError, with the tail of ngspice's output, when ngspice is missing,
    fails, exceeds timeout_s (s), stops before the end of the run or writes no data.
    """
    exe = shutil.which(_EXE)
    if exe is None:
        raise RuntimeError("ngspice is not installed (no 'ngspice' on PATH)")
    with tempfile.TemporaryDirectory(prefix="partpick-ngspice-") as tmp:
        folder = Path(tmp)
        data = folder / "probes.dat"
        deck = folder / "circuit.cir"
        deck.write_text(to_spice(netlist, cycles=cycles, points_per_cycle=points_per_cycle,
                                 probes=probes, data_file=data.name, uniform=uniform), encoding="utf-8")
        try:
            # ngspice runs in the temporary folder, so the deck names its data file
            # relative to it (no trouble with spaces in TMPDIR) and nothing it may
            # leave behind lands in the caller's directory.
            proc = subprocess.run([exe, "-b", deck.name], cwd=folder, capture_output=True, text=True,
                                  timeout=timeout_s, stdin=subprocess.DEVNULL)
        except subprocess.TimeoutExpired as exc:
            out = (exc.stdout or "") + (exc.stderr or "")
            if isinstance(out, bytes):  # pragma: no cover - text=True gives str
                out = out.decode(errors="replace")
            raise RuntimeError(f"ngspice did not finish within {timeout_s:g} s:\n{_tail(out)}") from None
        output = proc.stdout + proc.stderr
        if proc.returncode != 0:
            raise RuntimeError(f"ngspice failed (exit code {proc.returncode}):\n{_tail(output)}")
        if not data.exists() or data.stat().st_size == 0:
            raise RuntimeError(f"ngspice wrote no data:\n{_tail(output)}")
        try:
            table = np.loadtxt(data, skiprows=1, ndmin=2)
        except ValueError as exc:
            raise RuntimeError(f"cannot read ngspice's data file ({exc}):\n{_tail(output)}") from None
    # wr_singlescale: column 0 is time, then one column per probe in the order asked.
    if table.shape[0] < 2 or table.shape[1] != 1 + len(probes):
        raise RuntimeError(f"ngspice wrote {table.shape[0]} rows of {table.shape[1]} columns, expected "
                           f"{1 + len(probes)} columns:\n{_tail(output)}")
    time_s = np.ascontiguousarray(table[:, 0])
    # ngspice writes what it has when the transient aborts (e.g. "timestep too
    # small"), so a short run is a failure, not a result.
    stop_s = cycles / netlist.f_hint_hz
    step_s = 1.0 / (netlist.f_hint_hz * points_per_cycle)
    # linearize writes whole steps only, so the last row may fall short by under one step.
    if time_s[-1] < stop_s - 1.01 * step_s:
        raise RuntimeError(f"ngspice stopped at {time_s[-1]:.6g} s of {stop_s:.6g} s:\n{_tail(output)}")
    return time_s, {key: np.ascontiguousarray(table[:, i + 1]) for i, key in enumerate(probes)}
