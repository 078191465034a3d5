"""Flame heights from the pressure at the holes (DEVELOPERS.md Methods §6).

Outflow through a hole follows the orifice law ``u = C_d sqrt(2 dp / rho)``
for ``dp > 0`` and stops (air is drawn in) for ``dp <= 0``.  A laminar jet
diffusion flame's height is proportional to its volumetric fuel flow
(Roper, Combustion and Flame 29, 219-226, 1977), so relative to the still
flame (``p = 0``) the height at a hole is

    h / h0 = < sqrt(max(0, 1 + p(t) / dP0)) >

averaged over the flame's response time (Ficken & Stephenson, The Physics
Teacher 17, 306-310, 1979).  Here the average is over one frame (about 1/30 s).

The **contrast** of a row of flames in one frame is
``(tallest - shortest) / tallest``: 0 for a flat row, 1 when some flame is out.
"""

from __future__ import annotations

import math

import numpy as np

#: Flame frames per second: the flame's response time is tens of ms (from memory).
FRAME_RATE_HZ = 30.0


def relative_flow(pressure_pa, static_pa: float) -> np.ndarray:
    """``sqrt(max(0, 1 + p / dP0))``: instantaneous fuel flow relative to the still flame."""
    return np.sqrt(np.maximum(0.0, 1.0 + np.asarray(pressure_pa) / static_pa))


def elliptic_e(m) -> np.ndarray:
    """Complete elliptic integral of the second kind ``E(m)``, parameter ``0 <= m <= 1``.

    By the arithmetic-geometric mean (Abramowitz & Stegun 17.6; DLMF 19.8.6);
    checked against ``scipy.special.ellipe`` in the tests.
    """
    m = np.asarray(m, dtype=float)
    a = np.ones_like(m)
    b = np.sqrt(1.0 - m)
    c = np.sqrt(m)
    total = 0.5 * c * c
    power = 0.5
    for _ in range(30):
        a, b, c = (a + b) / 2.0, np.sqrt(a * b), (a - b) / 2.0
        power *= 2.0
        total = total + power * c * c
    k = np.pi / (2.0 * a)  # complete integral of the first kind
    return np.where(m >= 1.0, 1.0, k * (1.0 - total))


def sine_flame_height(ratio) -> np.ndarray:
    """Mean relative flame height for a steady sine of relative amplitude ``r = p / dP0 <= 1``.

    ``< sqrt(1 + r sin t) > = (2 / pi) sqrt(1 + r) E(2 r / (1 + r))``
    (Gradshteyn & Ryzhik 2.576; DLMF section 19.2).  r = 0 gives 1, r = 1 gives 2 sqrt(2) / pi.
    """
    r = np.asarray(ratio, dtype=float)
    if np.any((r < 0) | (r > 1)):
        raise ValueError("the closed form holds for 0 <= r <= 1")
    return 2.0 / np.pi * np.sqrt(1.0 + r) * elliptic_e(2.0 * r / (1.0 + r))


def frame_flames(pressure_pa: np.ndarray, static_pa: float, frame_samples: int,
                 gain: float = 1.0, overwrite: bool = False):
    """Relative flame height and air-drawn-in fraction per hole and frame.

    Parameters
    ----------
    pressure_pa : ndarray, shape (holes, N)
        Acoustic pressure at each hole, Pa (above or below the static level);
        samples past the last whole frame are ignored.
    static_pa : float
        Static overpressure ``dP0``, Pa.
    frame_samples : int
        Samples per flame frame.
    gain : float
        Linear gain applied to ``pressure_pa`` first (> 0).
    overwrite : bool
        ``pressure_pa`` (float32 or float64) may be used as scratch space.

    Returns
    -------
    height : ndarray, shape (frames, holes)
        ``< sqrt(max(0, 1 + g p / dP0)) >`` over each frame.
    air_in : ndarray, shape (frames, holes)
        Fraction of each frame during which the pressure is below ambient
        (``1 + g p / dP0 < 0``) and air is drawn in.

    Notes
    -----
    Computed as ``sqrt(s) < sqrt(max(0, p + 1/s)) >`` with ``s = g / dP0``:
    one addition, one square root and one sum per sample.
    """
    if not gain > 0 or not static_pa > 0:
        raise ValueError("gain and static pressure must be positive")
    pressure_pa = np.asarray(pressure_pa)
    holes, n = pressure_pa.shape
    frames = n // frame_samples
    s = gain / static_pa
    rel = pressure_pa[:, :frames * frame_samples]
    if overwrite and rel.dtype in (np.float32, np.float64):
        rel += rel.dtype.type(1.0 / s)
    else:
        rel = rel + 1.0 / s  # a new array (float64 for float64 input)
    block = rel.reshape(holes, frames, frame_samples)
    air_in = np.zeros((holes, frames), dtype=np.float32)
    if frames and float(block.min()) < 0.0:
        air_in = (block < 0.0).mean(axis=2)
        np.maximum(rel, 0.0, out=rel)
    np.sqrt(rel, out=rel)
    height = block.sum(axis=2, dtype=np.float64) * (math.sqrt(s) / frame_samples)
    return height.T.astype(np.float32), air_in.T.astype(np.float32)


def row_contrast(height: np.ndarray) -> np.ndarray:
    """Contrast of the flame row per frame: ``(tallest - shortest) / tallest`` (0 to 1).

    Parameters
    ----------
    height : ndarray, shape (frames, holes)
    """
    height = np.asarray(height, dtype=float)
    if height.shape[-1] == 0:
        return np.zeros(height.shape[:-1])
    top = height.max(axis=-1)
    low = height.min(axis=-1)
    with np.errstate(invalid="ignore", divide="ignore"):
        return np.where(top > 0, (top - low) / np.where(top > 0, top, 1.0), 0.0)
