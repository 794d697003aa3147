"""The per-build solver context: explicit state that one build (or one record command) shares.

A build asks the method of moments many questions about the same meshes: the resonance solve
reads the feed impedance at each design frequency, the SWR curve and the bandwidth read it
across each band, coverage and performance need the segment currents at the design
frequency. Each question needs the same solution of Z c = V. The context keeps, per mesh and
frequency, the port responses c_p = Z^-1 e_p (one column per port, N x P, small), so every
impedance matrix is filled and solved once; port impedances and currents for any drive follow
from them by linearity. It also holds the Sommerfeld kernel tables and the solved antennas and
predictions of this build, keyed by their (immutable) inputs.

Nothing here is module level: a build makes one :class:`Solver`, passes it down, and drops it.

BLAS threads: the matrices are small (a few hundred unknowns), where a multi-threaded BLAS
spends more time waking and synchronising its threads than computing, and on a shared
machine oversubscribes the cores. Each fill and solve therefore runs with one BLAS thread
(threadpoolctl), the rest of the program with the default; bench/packet.py prints both.
"""

from __future__ import annotations

from collections.abc import Callable
from contextlib import nullcontext
from dataclasses import dataclass, field, replace
from typing import Any, TypeVar

import numpy as np

from buildsheet.em import mom
from buildsheet.em.currents import SegmentCurrents
from buildsheet.em.sommerfeld import TableStore

T = TypeVar("T")


def mesh_key(mesh: mom.Mesh) -> tuple[Any, ...]:
    """What determines a mesh's impedance matrix: its structure (wires, segments, ports,
    ground; notes aside) and, over a Sommerfeld ground, the kernel-table grid it reads."""
    grid = mesh.half_space.grid if mesh.half_space is not None else None
    return (replace(mesh.structure, notes=()), grid)


@dataclass(eq=False)
class Solver:
    """Solver state of one build. ``fills``: impedance matrices filled so far."""

    tables: TableStore = field(default_factory=TableStore)
    fills: int = 0
    _responses: dict[tuple[Any, float], np.ndarray] = field(default_factory=dict, repr=False)
    #: solved antennas and predictions of this build, by the callers' own immutable keys
    _kept: dict[Any, Any] = field(default_factory=dict, repr=False)
    #: BLAS threads for a fill and solve (None: leave the library's default)
    blas_threads: int | None = 1
    _blas: Any = field(default=None, repr=False)

    def responses(self, mesh: mom.Mesh, frequency_hz: float) -> np.ndarray:
        """Z^-1 e_p for every port p of ``mesh`` at ``frequency_hz``, (N, P) complex, A/V."""
        key = (mesh_key(mesh), float(frequency_hz))
        out = self._responses.get(key)
        if out is None:
            self.fills += 1
            with self._thread_limit():
                out = mom.port_responses(mesh, float(frequency_hz))
            out.flags.writeable = False
            self._responses[key] = out
        return out

    def kept(self, key: Any, compute: Callable[[], T]) -> T:
        """The result stored under ``key`` (hashable, immutable inputs), computed once."""
        if key not in self._kept:
            self._kept[key] = compute()
        return self._kept[key]

    def _thread_limit(self) -> Any:
        """Context limiting BLAS to ``blas_threads`` (the library's pools found once)."""
        if self.blas_threads is None:
            return nullcontext()
        if self._blas is None:
            from threadpoolctl import ThreadpoolController

            self._blas = ThreadpoolController()
        return self._blas.limit(limits=self.blas_threads, user_api="blas")

    def port_impedances(self, mesh: mom.Mesh, frequencies_hz: np.ndarray | float) -> np.ndarray:
        """Open-circuit impedance matrix of the ports, (F, P, P) complex ohm."""
        f = np.atleast_1d(np.asarray(frequencies_hz, dtype=float))
        return np.stack([mom.impedances_from(mesh, self.responses(mesh, float(fi))) for fi in f])

    def currents(self, mesh: mom.Mesh, frequency_hz: float,
                 drive_v: float | np.ndarray = 1.0) -> SegmentCurrents:
        """Segment currents with the ports driven by ``drive_v`` (V, one value or one per port)."""
        return mom.currents_from(mesh, float(frequency_hz), self.responses(mesh, frequency_hz),
                                 drive_v)


def solver_or_new(solver: Solver | None) -> Solver:
    """``solver``, or a fresh context for a caller that has none (one question, one context)."""
    return solver if solver is not None else Solver()
