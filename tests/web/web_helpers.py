"""Small helpers shared by the web tests (imported as ``web_helpers``)."""

from __future__ import annotations

import json
from html.parser import HTMLParser

from fastapi.testclient import TestClient

BASE_URL = "http://127.0.0.1"  # the client's Host is then one the app accepts


def project_count(client: TestClient, include_deleted: bool = True) -> int:
    params = {"include_deleted": "true"} if include_deleted else {}
    return len(client.get("/api/projects", params=params).json())


def htmx(**extra: str) -> dict[str, str]:
    """Headers an htmx request carries."""
    return {"HX-Request": "true", **extra}


def dumps(model: dict) -> bytes:
    return json.dumps(model).encode()


class LinkParser(HTMLParser):
    """Collects href and src attribute values of a page."""

    def __init__(self) -> None:
        super().__init__()
        self.urls: list[str] = []

    def handle_starttag(self, tag: str, attrs: list[tuple[str, str | None]]) -> None:
        for name, value in attrs:
            if name in {"href", "src"} and value:
                self.urls.append(value)


def links_of(html: str) -> list[str]:
    parser = LinkParser()
    parser.feed(html)
    return parser.urls


def decoded_png(content: bytes, min_px: int = 100):
    """The pixels of a PNG answer, checked to decode, to be at least ``min_px`` square and
    to draw something (many colours, not one flat fill)."""
    import io

    import numpy as np
    from matplotlib import image

    assert content.startswith(b"\x89PNG\r\n\x1a\n")
    pixels = image.imread(io.BytesIO(content), format="png")
    height, width = pixels.shape[:2]
    assert height >= min_px and width >= min_px, (height, width)
    colours = np.unique(pixels.reshape(-1, pixels.shape[-1]), axis=0)
    assert len(colours) > 20, f"{len(colours)} colours: a blank image"
    return pixels
