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
    u8 = np.round(img * 255).astype(np.int64) if img.dtype.kind == "f" else img.astype(np.int64)
    flat = u8.reshape(-1, u8.shape[-1])
    packed = flat @ (256 ** np.arange(flat.shape[1], dtype=np.int64))  # one integer per colour
    colours, counts = np.unique(packed, return_counts=True)
    return float(np.mean(packed != colours[np.argmax(counts)]))
