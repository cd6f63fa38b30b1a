r"""Placement sweep: move one part (or the wheel) over a grid and map the failure behaviour.

For every offset ``(dx, dy)`` of the part's centre in the design frame, the mass properties
are recomputed (:func:`kit.massprops.compute`, parallel-axis theorem), then the relaxed-hover
equilibrium of the chosen failure set and the no-failure hover
(:func:`kit.analysis.equilibrium.solve`), their LQR, controllability distance and H2 norm
(:func:`kit.analysis.control.design_control`) and the saturation probability
(:func:`kit.analysis.risk.saturation_risk`). The physics is theirs; this module only moves the
part and lays the results out on the grid:

.. math::

    \mathbf c(d) = \frac{\sum_k m_k \mathbf c_k + m_p (\mathbf c_p + d)}{m}, \qquad
    \mathbf J(d) = \sum_k \big[\mathbf J_k + m_k ((\mathbf d_k \cdot \mathbf d_k)\mathbf 1
    - \mathbf d_k \mathbf d_k^{\mathsf T})\big], \quad \mathbf d_k = \mathbf c_k(d) - \mathbf c(d).

Rows of the grid (one ``y`` offset each) are the tasks handed to the executor. Each point's
operating point is the one :func:`kit.analysis.equilibrium.solve` picks for the moved design
alone (no continuation from a neighbour), so the zero-offset point equals ``analyze`` and the
numbers depend neither on the order of the points nor on the executor (a process pool, or a
dask.distributed cluster through :func:`cluster_executor`).

References
----------
Beer, Johnston, Cornwell: Vector Mechanics for Engineers: Dynamics, 9th ed., sec. 9.11-9.18
(parallel-axis theorem; from memory). The relaxed-hover, LQR and risk references are in
:mod:`kit.analysis.equilibrium`, :mod:`kit.analysis.control` and :mod:`kit.analysis.risk`.
"""

from __future__ import annotations

import html
import math
import multiprocessing
from collections.abc import Callable, Sequence
from concurrent.futures import Executor, ProcessPoolExecutor, as_completed
from dataclasses import dataclass, replace

import numpy as np

from kit.analysis import control as C
from kit.analysis import equilibrium as E
from kit.analysis import risk as R
from kit.analysis.vehicle import Vehicle
from kit.design import Design
from kit.massprops import compute

#: Name that selects the momentum wheel instead of a part.
WHEEL = "wheel"
#: Workers of the default process pool.
DEFAULT_WORKERS = 2

#: Per-point quantities of one case, in the order of :class:`CaseMap`'s array fields.
_FIELDS = ("found", "spin_rate_rad_s", "tilt_deg", "controllable", "controllability_distance",
           "h2_norm", "saturation_probability", "max_thrust_fraction")


@dataclass(frozen=True)
class CaseMap:
    """Maps of one failure case over the grid; every array has shape ``(ny, nx)``.

    Attributes
    ----------
    failed : tuple of str
        Failed rotors (``()``: no failure).
    found : ndarray of bool
        An equilibrium exists within the thrust limits.
    spin_rate_rad_s : ndarray
        Signed spin rate of the equilibrium, in rad/s (nan where none).
    tilt_deg : ndarray
        Angle between the spin axis and body z, in degrees.
    controllable : ndarray of bool
    controllability_distance : ndarray
        Relative distance to uncontrollability (0: uncontrollable, nan: no equilibrium).
    h2_norm : ndarray
        H2 norm from body torques to ``(n_x, n_y)`` (nan: no stabilising LQR).
    saturation_probability : ndarray
        Probability per second that a rotor saturates under the design's disturbance model
        (nan: no stabilising LQR).
    max_thrust_fraction : ndarray
        Largest ``f_i / f_max,i`` at the equilibrium.
    """

    failed: tuple[str, ...]
    found: np.ndarray
    spin_rate_rad_s: np.ndarray
    tilt_deg: np.ndarray
    controllable: np.ndarray
    controllability_distance: np.ndarray
    h2_norm: np.ndarray
    saturation_probability: np.ndarray
    max_thrust_fraction: np.ndarray

    def to_dict(self) -> dict:
        def grid(a):
            if a.dtype == bool:
                return [[bool(v) for v in row] for row in a]
            return [[float(v) if math.isfinite(v) else None for v in row] for row in a]

        out: dict = {"failed": list(self.failed)}
        for name in _FIELDS:
            out[name] = grid(getattr(self, name))
        return out

    def summary(self) -> dict:
        """Counts and ranges over the grid (nan-aware), plain JSON."""

        def rng(a):
            a = a[np.isfinite(a)]
            return [float(a.min()), float(a.max())] if a.size else None

        return {
            "points": int(self.found.size),
            "found": int(np.sum(self.found)),
            "controllable": int(np.sum(self.controllable)),
            "spin_rate_rad_s": rng(self.spin_rate_rad_s),
            "controllability_distance": rng(self.controllability_distance),
            "h2_norm": rng(self.h2_norm),
            "saturation_probability": rng(self.saturation_probability),
            "max_thrust_fraction": rng(self.max_thrust_fraction),
        }


@dataclass(frozen=True)
class PlacementMap:
    """Result of :func:`placement_sweep`.

    Attributes
    ----------
    design_name : str
    part : str
        Part name, or ``"wheel"``.
    base_position_m : ndarray (3,)
        The part's position in the design, in m (offsets are added to x and y).
    x_offsets_m, y_offsets_m : ndarray (nx,), (ny,)
        Grid offsets, in m; array element ``[j, i]`` is at ``(x_offsets_m[i], y_offsets_m[j])``.
    com_m : ndarray (ny, nx, 3)
        Centre of mass in the design frame, in m.
    failure : CaseMap or None
        The chosen failure set (None when the sweep is of the no-failure case only).
    hover : CaseMap
        No failure.
    thrust_ratio : dict or None
        Fixed thrust ratios of the failure case (None: least effort).
    """

    design_name: str
    part: str
    base_position_m: np.ndarray
    x_offsets_m: np.ndarray
    y_offsets_m: np.ndarray
    com_m: np.ndarray
    failure: CaseMap | None
    hover: CaseMap
    thrust_ratio: dict | None = None

    @property
    def shape(self) -> tuple[int, int]:
        return (self.y_offsets_m.size, self.x_offsets_m.size)

    def to_dict(self) -> dict:
        return {
            "design_name": self.design_name,
            "part": self.part,
            "base_position_m": [float(v) for v in self.base_position_m],
            "x_offsets_m": [float(v) for v in self.x_offsets_m],
            "y_offsets_m": [float(v) for v in self.y_offsets_m],
            "thrust_ratio": None if self.thrust_ratio is None else dict(self.thrust_ratio),
            "com_m": [[[float(v) for v in p] for p in row] for row in self.com_m],
            "failure": None if self.failure is None else self.failure.to_dict(),
            "hover": self.hover.to_dict(),
            "summary": {
                "failure": None if self.failure is None else self.failure.summary(),
                "hover": self.hover.summary(),
            },
        }

    def _repr_html_(self) -> str:
        def fmt(v):
            if v is None:
                return "-"
            if isinstance(v, list):
                return " .. ".join(f"{x:.4g}" for x in v)
            return str(v)

        cases = [("no failure", self.hover)]
        if self.failure is not None:
            cases.insert(0, ("failed: " + ", ".join(self.failure.failed), self.failure))
        keys = ["points", "found", "controllable", "spin_rate_rad_s", "controllability_distance",
                "h2_norm", "saturation_probability", "max_thrust_fraction"]
        labels = ["grid points", "equilibrium found", "controllable", "spin rate (rad/s)",
                  "controllability distance", "H2 norm", "saturation probability (1/s)",
                  "max thrust fraction"]
        head = "<th></th>" + "".join(f"<th>{html.escape(c)}</th>" for c, _ in cases)
        sums = [m.summary() for _, m in cases]
        body = "".join(
            f"<tr><th>{html.escape(lab)}</th>"
            + "".join(f"<td>{html.escape(fmt(s[k]))}</td>" for s in sums) + "</tr>"
            for k, lab in zip(keys, labels, strict=True))
        dx = self.x_offsets_m
        dy = self.y_offsets_m
        cap = (f"Placement of {self.part} in {self.design_name}: {dx.size} x {dy.size} grid, "
               f"x offset {dx.min():.3g}..{dx.max():.3g} m, "
               f"y offset {dy.min():.3g}..{dy.max():.3g} m")
        return (f"<table><caption>{html.escape(cap)}</caption><thead><tr>{head}</tr></thead>"
                f"<tbody>{body}</tbody></table>")


def base_position(design: Design, part: str) -> np.ndarray:
    """Position of a part (or the wheel) in the design, in m."""
    if part == WHEEL:
        if design.wheel is None:
            raise ValueError(f"part: {part!r} -> this design has no wheel")
        return np.asarray(design.wheel.position_m, float)
    for p in design.parts:
        if p.name == part:
            return np.asarray(p.position_m, float)
    names = ", ".join(p.name for p in design.parts)
    raise ValueError(f"part: {part!r} -> one of {names}" +
                     (", wheel" if design.wheel is not None else ""))


def moved(design: Design, part: str, dx_m: float, dy_m: float) -> Design:
    """The design with ``part`` (or the wheel) moved by ``(dx, dy)`` in m."""
    x, y, z = base_position(design, part)
    pos = (float(x + dx_m), float(y + dy_m), float(z))
    if part == WHEEL:
        return replace(design, wheel=replace(design.wheel, position_m=pos))
    parts = tuple(replace(p, position_m=pos) if p.name == part else p for p in design.parts)
    return replace(design, parts=parts)


def _case(veh: Vehicle, failed, ratio) -> list:
    eq = E.solve(veh, failed, thrust_ratio=ratio, complete=False)
    nan = math.nan
    if not eq.found:
        return [False, nan, nan, False, nan, nan, nan, nan]
    # the maps show no robustness figure (lag and channel margins): not computed per point
    ctl = C.design_control(veh, eq, with_robustness=False)
    c = veh.design.control
    risk = R.saturation_risk(eq, ctl, c.disturbance_torque_psd_n2_m2_s,
                             c.disturbance_time_constant_s,
                             min_thrust_n=[r.min_thrust_n for r in veh.design.rotors])
    row = [True, float(eq.spin_rate_rad_s), float(eq.tilt_deg), bool(ctl.controllable),
           float(ctl.controllability_distance),
           float(ctl.h2_norm) if ctl.K is not None else nan,
           float(risk.probability_per_s) if risk is not None else nan,
           float(np.max(eq.thrust_fraction))]
    return row


def _row_task(design: Design, part: str, dy_m: float, x_offsets_m: Sequence[float],
              failed: tuple[str, ...], ratio: dict | None) -> list:
    """One grid row: ``[(com, failure_row or None, hover_row), ...]`` along x."""
    out = []
    for dx in x_offsets_m:
        d = moved(design, part, float(dx), float(dy_m))
        mp = compute(d)
        veh = Vehicle.from_design(d, mp)
        frow = _case(veh, failed, ratio) if failed else None
        hrow = _case(veh, (), None)
        out.append(([float(v) for v in mp.com_m], frow, hrow))
    return out


class ClusterExecutor:
    """A ``concurrent.futures`` executor on a dask.distributed cluster (the optional extra
    ``cluster``), closing its client on :meth:`shutdown`.

    Parameters
    ----------
    address : str or None
        The scheduler's address (``tcp://host:8786``); None starts a local cluster of
        ``n_workers`` threads in this process (for tests).
    n_workers : int
        Workers of the local cluster.
    """

    def __init__(self, address: str | None = None, n_workers: int = DEFAULT_WORKERS) -> None:
        from distributed import Client, LocalCluster

        self._cluster = None
        if address is None:
            self._cluster = LocalCluster(n_workers=n_workers, processes=False,
                                         threads_per_worker=1, dashboard_address=None)
            self.client = Client(self._cluster)
        else:
            self.client = Client(address, timeout=10)
        self._ex = self.client.get_executor(pure=False)

    def submit(self, fn, *args, **kwargs):
        return self._ex.submit(fn, *args, **kwargs)

    def map(self, fn, *iterables, **kwargs):
        return self._ex.map(fn, *iterables, **kwargs)

    def shutdown(self, wait: bool = True, *, cancel_futures: bool = False) -> None:
        self._ex.shutdown(wait=wait)
        self.client.close()
        if self._cluster is not None:
            self._cluster.close()

    def __enter__(self) -> ClusterExecutor:
        return self

    def __exit__(self, *exc) -> None:
        self.shutdown()


def cluster_executor(address: str | None = None,
                     n_workers: int = DEFAULT_WORKERS) -> ClusterExecutor:
    """An executor on the dask.distributed scheduler at ``address`` (None: a local cluster).

    Parameters
    ----------
    address : str or None
        Scheduler address, e.g. ``tcp://10.0.0.5:8786``.
    n_workers : int
        Workers of the local cluster when ``address`` is None.

    Raises
    ------
    ImportError
        dask.distributed is not installed (``pip install 'rotorbook[cluster]'``).
    OSError
        No scheduler answers at ``address``.
    """
    return ClusterExecutor(address, n_workers)


def _one_blas_thread() -> None:
    """Worker initializer: one BLAS / OpenMP thread per worker process.

    Each point of a sweep does many small linear-algebra calls; with several worker processes,
    multi-threaded BLAS in each of them oversubscribes the cores (measured here: 2 workers took
    1.4x the time of 1). threadpoolctl limits the libraries already loaded in the worker.
    """
    from threadpoolctl import threadpool_limits

    threadpool_limits(1)


def default_executor(max_workers: int = DEFAULT_WORKERS) -> ProcessPoolExecutor:
    """A process pool of ``max_workers`` (spawned processes: safe with threads, any OS), each
    worker with one BLAS thread.

    Parameters
    ----------
    max_workers : int
        Worker processes (default 2, the cores of the reference machine).
    """
    return ProcessPoolExecutor(max_workers=max_workers,
                               mp_context=multiprocessing.get_context("spawn"),
                               initializer=_one_blas_thread)


def placement_sweep(design: Design, part: str, x_offsets_m, y_offsets_m, failed=(),
                    thrust_ratio: dict | None = None, *, executor: Executor | None = None,
                    progress: Callable[[int, int], None] | None = None) -> PlacementMap:
    """Move ``part`` over an ``nx`` by ``ny`` grid and map equilibrium, control and risk.

    Parameters
    ----------
    design : Design
        The design; it is not changed (moved copies are made with ``dataclasses.replace``).
    part : str
        Name of a ``[[part]]``, or ``"wheel"``.
    x_offsets_m, y_offsets_m : array_like
        Offsets of the part's centre along design x and y, in m.
    failed : sequence of str
        The failure set mapped besides the no-failure case (``()``: no-failure only).
    thrust_ratio : dict or None
        Fixed thrust ratios of the failure case (None: least effort).
    executor : concurrent.futures.Executor or None
        Runs one task per grid row. None: a process pool of :data:`DEFAULT_WORKERS` workers,
        shut down at the end.
    progress : callable or None
        ``progress(done, total)`` in grid points, called once with ``(0, total)`` and after
        each row; the last call is ``(total, total)``.

    Returns
    -------
    PlacementMap
    """
    xs = np.atleast_1d(np.asarray(x_offsets_m, float))
    ys = np.atleast_1d(np.asarray(y_offsets_m, float))
    failed = tuple(failed)
    base = base_position(design, part)
    if failed:
        unknown = [f for f in failed if f not in design.rotor_names]
        if unknown:
            raise ValueError(f"failed: {unknown!r} -> rotor names: "
                             + ", ".join(design.rotor_names))
    nx, ny = xs.size, ys.size
    total = nx * ny
    own = executor is None
    ex = default_executor() if own else executor
    rows: dict[int, list] = {}
    try:
        if progress is not None:
            progress(0, total)
        futs = {ex.submit(_row_task, design, part, float(dy), tuple(float(v) for v in xs),
                          failed, thrust_ratio): j for j, dy in enumerate(ys)}
        done = 0
        for fut in as_completed(futs):
            rows[futs[fut]] = fut.result()
            done += nx
            if progress is not None:
                progress(done, total)
    finally:
        if own:
            ex.shutdown(wait=True, cancel_futures=True)

    com = np.array([[pt[0] for pt in rows[j]] for j in range(ny)], float).reshape(ny, nx, 3)

    def case_map(k: int, which: tuple[str, ...]) -> CaseMap:
        vals = np.array([[pt[k] for pt in rows[j]] for j in range(ny)], float)
        vals = vals.reshape(ny, nx, len(_FIELDS))
        arrays = {}
        for i, name in enumerate(_FIELDS):
            a = vals[:, :, i]
            arrays[name] = a.astype(bool) if name in ("found", "controllable") else a
        return CaseMap(failed=which, **arrays)

    return PlacementMap(
        design_name=design.name, part=part, base_position_m=base, x_offsets_m=xs,
        y_offsets_m=ys, com_m=com, failure=case_map(1, failed) if failed else None,
        hover=case_map(2, ()), thrust_ratio=None if thrust_ratio is None else dict(thrust_ratio),
    )
