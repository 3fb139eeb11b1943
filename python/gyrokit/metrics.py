"""How good an embedding is: distortion of distances, graph reconstruction
(mean average precision and mean rank), exact tree distances."""

from __future__ import annotations

__all__: list = []
