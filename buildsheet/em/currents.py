"""Segment currents: the hand-off from any antenna model to far-field and exposure work."""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np


@dataclass(frozen=True)
class SegmentCurrents:
    """Current on straight segments at one frequency, in the antenna's site frame.

    Frame: x east, y north, z up, origin on the ground below the feed point (metres).
    centres: (N, 3) segment midpoints, m; vectors: (N, 3) segment direction times length, m;
    currents: (N,) complex segment-average current, A, for the stated feed drive;
    input_power_w: real power delivered at the feed for that drive, W (includes conductor and,
    where modelled, ground loss); conductor_loss_w: part of it dissipated in the wire, W.
    """

    frequency_hz: float
    centres: np.ndarray
    vectors: np.ndarray
    currents: np.ndarray
    input_power_w: float
    conductor_loss_w: float = 0.0
