"""Sampling the task region: grid poses from the task box, points and orientations."""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

__all__ = ["TaskGrid", "task_poses", "MAX_POSES"]

from .limits import MAX_GRID_POSES as MAX_POSES  # refuse samplings that would not fit in memory and time


@dataclass(frozen=True)
class TaskGrid:
    """Poses sampling the task region.

    poses : (N, n) [m, rad]; positions : (P, 3) the distinct positions [m];
    orientation_index : (N,) which of ``design.task.orientations`` each pose uses (0 for a
    point platform); position_index : (N,) row of ``positions``; shape : (nx, ny, nz) of the
    box grid, or ``None`` when only points were sampled; axes : the three grid axes [m] (or
    ``None``); step : grid step [m]; from_box : (P,) True for positions on the box grid.
    """

    poses: np.ndarray
    positions: np.ndarray
    orientation_index: np.ndarray
    position_index: np.ndarray
    shape: tuple[int, int, int] | None
    axes: tuple[np.ndarray, np.ndarray, np.ndarray] | None
    step: float
    from_box: np.ndarray


def _axis(lo: float, hi: float, step: float) -> np.ndarray:
    n = int(np.floor((hi - lo) / step + 1e-9)) + 1
    if n <= 1:
        return np.array([0.5 * (lo + hi)])
    # spread the points so that both faces of the box are sampled
    return np.linspace(lo, hi, max(n, 2))


def task_poses(design, *, step: float | None = None, orientations=None, include_points: bool = True) -> TaskGrid:
    """Grid of poses over the task box (plus the task points) for every orientation.

    Parameters
    ----------
    design : Design
    step : grid step [m]; default ``design.task.step``.
    orientations : (K, 3) roll, pitch, yaw [rad]; default ``design.task.orientations``
        (ignored for point platforms).
    include_points : also sample ``design.task.points``.

    Raises
    ------
    ValueError
        Step not positive or not finite, an empty region, an empty orientation set, or a grid
        larger than :data:`MAX_POSES`.
    """
    step = design.task.step if step is None else float(step)
    if not np.isfinite(step) or step <= 0:
        raise ValueError(f"grid step must be a positive length, got {step!r} m")
    task = design.task
    blocks = []
    shape = axes = None
    if task.box_lower is not None:
        lo, hi = np.array(task.box_lower), np.array(task.box_upper)
        counts = np.floor((hi - lo) / step + 1e-9) + 1
        if np.prod(counts) > MAX_POSES:
            raise ValueError(f"a {step * 1e3:g} mm step gives {np.prod(counts):,.0f} positions; "
                             f"use a coarser step (at most {MAX_POSES:,}, cablekit.limits.MAX_GRID_POSES)")
        axes = tuple(_axis(lo[k], hi[k], step) for k in range(3))
        shape = tuple(len(a) for a in axes)
        X, Y, Z = np.meshgrid(*axes, indexing="ij")
        blocks.append(np.column_stack([X.ravel(), Y.ravel(), Z.ravel()]))
    n_box = len(blocks[0]) if blocks else 0
    if include_points and task.points:
        blocks.append(np.array(task.points, dtype=float))
    if not blocks:
        raise ValueError("the task region is empty: give a task box or task points")
    positions = np.vstack(blocks)
    from_box = np.arange(len(positions)) < n_box
    if design.dof == 3:
        poses = positions.copy()
        return TaskGrid(poses=poses, positions=positions, orientation_index=np.zeros(len(poses), int),
                        position_index=np.arange(len(poses)), shape=shape, axes=axes, step=step, from_box=from_box)
    oris = np.array(task.orientations if orientations is None else orientations, dtype=float).reshape(-1, 3)
    if len(oris) == 0:
        raise ValueError("the orientation set is empty: give at least one roll, pitch, yaw")
    if not np.all(np.isfinite(oris)):
        raise ValueError("orientations must be finite angles")
    P, K = len(positions), len(oris)
    if P * K > MAX_POSES:
        raise ValueError(f"{P:,} positions x {K} orientations is too many poses (at most {MAX_POSES:,}, "
                         "cablekit.limits.MAX_GRID_POSES); use a coarser step")
    poses = np.empty((P * K, 6))
    poses[:, :3] = np.repeat(positions, K, axis=0)
    poses[:, 3:] = np.tile(oris, (P, 1))
    return TaskGrid(poses=poses, positions=positions, orientation_index=np.tile(np.arange(K), P),
                    position_index=np.repeat(np.arange(P), K), shape=shape, axes=axes, step=step, from_box=from_box)
