"""Getting a hierarchy, a distance table or a graph into hyperbolic space.

Every function returns an :class:`Embedding`: the points in the requested
model, with the model name and curvature, so that they can be passed on to
any other gyrokit function (``model=e.model, curvature=e.curvature``).
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Optional

import numpy as np


@dataclass(frozen=True)
class Embedding:
    """Result of the ``gyrokit.embed`` functions.

    ``points`` is ``(n, d)`` (``(n, d + 1)`` on the hyperboloid), row ``i``
    the point of node ``i``. ``scale`` is the hyperbolic length of every tree
    edge in units of the radius R (``embed.tree``), ``None`` otherwise.
    ``loss`` (per epoch) and ``epochs`` are set by the learned embeddings and
    ``None`` otherwise.
    """

    points: np.ndarray
    model: str
    curvature: float
    scale: Optional[float] = None
    loss: Optional[np.ndarray] = None
    epochs: Optional[int] = None


__all__ = ["Embedding"]
from ._hmds import from_distances  # noqa: E402  (h-MDS; needs Embedding above)

__all__ += ["from_distances"]
from ._graph_embed import TrainingInterruptedWarning, graph  # noqa: E402  (learned graph embeddings)
