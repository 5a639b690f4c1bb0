"""Charge from the currents of sources on quasi-static ramps.

The device and receiver tables (:mod:`analyze.physics.table_measurement`,
:mod:`analyze.physics.receiver_tables`) are measured by ramping voltage
sources slowly and integrating the current each one delivers; a 1 fF
capacitor on a ramp of its own calibrates sign and integration.
"""

from __future__ import annotations

import numpy as np

__all__ = ["delivered_charge", "calibration"]


def delivered_charge(table) -> np.ndarray:
    """The charge (fC) each source has delivered into the circuit since the
    first sample: minus the trapezoid-rule integral of its branch current
    (SPICE's branch current flows from + through the source).

    Parameters
    ----------
    table : ndarray
        ``wrdata`` columns: time (s), then one branch current (A) per source.

    Returns
    -------
    ndarray
        One row per sample, one column per source.

    Examples
    --------
    A source that sinks a constant 1 µA (branch current +1e-6 A) for 1 ns
    has delivered −1 fC:

    >>> table = np.array([[0.0, 1e-6], [0.5e-9, 1e-6], [1e-9, 1e-6]])
    >>> delivered_charge(table)[1:, 0].round(12).tolist()
    [-0.5, -1.0]
    """
    t = table[:, 0]
    return -np.concatenate([np.zeros((1, table.shape[1] - 1)),
                            np.cumsum(0.5 * (table[1:, 1:] + table[:-1, 1:]) * np.diff(t)[:, None], axis=0)]) * 1e15


def calibration(grid, calibrated) -> float:
    """The factor that makes the 1 fF calibration capacitor's charge over
    the voltage ``grid`` come out as 1 fC/V (1.0 when it did not move).

    Examples
    --------
    >>> round(float(calibration(np.linspace(0, 1.8, 4), np.linspace(0, 1.8, 4) * 0.5)), 12)
    2.0
    """
    calibrated = np.asarray(calibrated, dtype=float)
    return 1.0 / np.polyfit(grid, calibrated, 1)[0] if np.ptp(calibrated) > 0 else 1.0
