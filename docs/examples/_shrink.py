"""Keep the guide figures small: scale a PNG down and store it with a 256-colour palette."""

from __future__ import annotations

from pathlib import Path

from PIL import Image


def shrink(path: Path, max_width: int = 760) -> Path:
    img = Image.open(path).convert("RGB")
    if img.width > max_width:
        h = round(img.height * max_width / img.width)
        img = img.resize((max_width, h), Image.LANCZOS)
    img.quantize(colors=256, method=Image.Quantize.MEDIANCUT).save(path, optimize=True)
    return path
