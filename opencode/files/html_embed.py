"""PNG charts embedded in HTML as data URLs, so a report is one file that loads nothing from outside."""

from __future__ import annotations

import base64
import html
import os
from pathlib import Path

from opencode.errors import OpenCodeError


def png_img(chart: bytes | str | os.PathLike, alt: str, css_class: str = "oc-chart") -> str:
    """An <img> holding the PNG (bytes or a file) as a base64 data URL; anything not a PNG is refused."""
    data = chart if isinstance(chart, bytes) else Path(chart).read_bytes()
    if not data.startswith(b"\x89PNG"):
        raise OpenCodeError(f"{'chart' if isinstance(chart, bytes) else chart}: is not a PNG image")
    encoded = base64.b64encode(data).decode("ascii")
    return f'<img class="{css_class}" alt="{html.escape(alt)}" src="data:image/png;base64,{encoded}">'
