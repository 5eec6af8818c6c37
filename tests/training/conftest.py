"""A toy labelled-frame generator so training can be tested without the demo renderer."""

from __future__ import annotations

import cv2
import numpy as np


def toy_sample(rng: np.random.Generator) -> tuple[np.ndarray, np.ndarray]:
    """A grey bench with a dark bar (the tool) whose narrow end is the tip; 15 % tool-free."""
    base = rng.uniform(90, 160)
    image = np.full((480, 640, 3), base, np.float32)
    image += cv2.resize(rng.normal(0, 12, (12, 16, 3)).astype(np.float32), (640, 480))
    kps = np.zeros((2, 3))
    if rng.random() > 0.15:
        tip = rng.uniform([40, 40], [600, 440])
        angle = rng.uniform(0, 2 * np.pi)
        rear = tip + 110 * np.array([np.cos(angle), np.sin(angle)])
        cv2.line(
            image,
            tuple(int(v) for v in rear),
            tuple(int(v) for v in tip),
            (40, 40, 45),
            16,
            cv2.LINE_AA,
        )
        cv2.circle(image, tuple(int(v) for v in tip), 5, (230, 230, 240), -1, cv2.LINE_AA)
        inside = (0 <= rear[0] < 640) and (0 <= rear[1] < 480)
        kps[0] = (*tip, 2)
        kps[1] = (*rear, 2 if inside else 0)
    return np.clip(image, 0, 255).astype(np.uint8), kps
