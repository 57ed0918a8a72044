"""Sampling the task region: grid poses from the task box, points and orientations.

Orientations are the task's list plus, when the design states ``task.orientation_range``,
every combination of ``orientation_samples`` evenly spaced values per angle (both bounds
included): all corners of the roll-pitch-yaw box and interior samples
(:func:`task_orientations`).  A sample set is not a proof: the workspace map states its grid
step and points per axis and checks the moves between neighbouring nodes
(:mod:`cablekit.workspace`).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

__all__ = ["TaskGrid", "task_poses", "task_orientations", "MAX_POSES"]

from .limits import MAX_GRID_POSES as MAX_POSES  # refuse samplings that would not fit in memory and time


@dataclass(frozen=True)
class TaskGrid:
    """Poses sampling the task region.

    poses : (N, n) [m, rad]; positions : (P, 3) the distinct positions [m];
    orientation_index : (N,) which of the orientations (:func:`task_orientations`) each pose uses (0 for a
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


def task_orientations(task) -> np.ndarray:
    """Every orientation the task asks for: the list, then the range grid (K, 3) [rad].

    The range ``((lo, hi), (lo, hi), (lo, hi))`` of roll, pitch, yaw gives
    ``orientation_samples`` values per angle from ``lo`` to ``hi`` (one value when
    ``lo == hi``) and takes every combination, so all ``2**k`` bound combinations of the
    ``k`` varying angles are in the set together with the interior samples.  Repeats are
    dropped, the order is kept.
    """
    oris = [tuple(map(float, o)) for o in task.orientations]
    rng = getattr(task, "orientation_range", None)
    if rng is not None:
        n = int(task.orientation_samples)
        if n < 2:
            raise ValueError(f"orientation_samples must be at least 2 (the bounds), got {n}")
        axes = [np.linspace(lo, hi, n) if hi > lo else np.array([lo]) for lo, hi in rng]
        grid = np.stack(np.meshgrid(*axes, indexing="ij"), axis=-1).reshape(-1, 3)
        oris += [tuple(map(float, o)) for o in grid]
    out = np.array(list(dict.fromkeys(oris)), dtype=float).reshape(-1, 3)
    return out


def box_counts(task, step: float) -> np.ndarray:
    """Grid positions along x, y, z of the task box at ``step`` [m] (3,), as :func:`task_poses`
    counts them against :data:`MAX_POSES` (floats: a huge count must not overflow)."""
    return np.floor((np.array(task.box_upper) - np.array(task.box_lower)) / step + 1e-9) + 1


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
    orientations : (K, 3) roll, pitch, yaw [rad]; default :func:`task_orientations`
        (the list and the range; ignored for point platforms).
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
        counts = box_counts(task, step)
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
    oris = task_orientations(task) if orientations is None else np.array(orientations, dtype=float).reshape(-1, 3)
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
