"""Reading figures back in tests: pixels from PNG bytes (matplotlib.image.imread, Pillow)."""

from __future__ import annotations

import io
from pathlib import Path

import matplotlib.image as mpimg
import numpy as np


def pixels(png) -> np.ndarray:
    """RGBA pixels, shape (height, width, 4), of PNG bytes or a PNG file."""
    data = Path(png).read_bytes() if isinstance(png, (str, Path)) else bytes(png)
    assert data[:8] == b"\x89PNG\r\n\x1a\n"  # reference: PNG file signature (ISO/IEC 15948)
    return mpimg.imread(io.BytesIO(data), format="png")


def drawn_share(img: np.ndarray) -> float:
    """Share of pixels that are not the background colour (the most common pixel)."""
    flat = img.reshape(-1, img.shape[-1])
    colours, counts = np.unique(flat, axis=0, return_counts=True)
    background = colours[np.argmax(counts)]
    return float(np.mean(np.any(flat != background, axis=1)))
