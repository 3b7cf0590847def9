"""Depth scales of a core: section depth, composite depth and event-free depth.

Composite depth [cm] increases downwards from the core top. A core drilled in sections gives
each measurement as depth below its section top; the composite depth is the section top plus
that depth.

Instantaneous deposits (turbidites, tephra, slumps; "event layers") took no time to settle,
so the age-depth model works on an *event-free* depth from which every event layer is cut
out:

.. math::

    e(d) = d - \\sum_i \\min\\bigl(\\max(d - t_i, 0),\\, b_i - t_i\\bigr)

for layers with top :math:`t_i` and bottom :math:`b_i`. A depth inside a layer maps to the
layer top on the event-free scale (all of the layer has the age of its top). The inverse maps
an event-free depth to the composite depth *above* any layer cut at that point (the layer
top), and below it otherwise. Hiatuses keep their place and are carried to the event-free
scale with the same map.
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass

import numpy as np

__all__ = ["Section", "EventLayer", "DepthScale"]


@dataclass(frozen=True)
class Section:
    """One drive/section of a core: a ``[[sections]]`` table of ``core.toml``, whose tables give
    depths below this section's top.

    Attributes
    ----------
    name : str
        Section name as used in the tables' ``section`` column.
    top_cm : float
        Composite depth of the section top [cm].
    """

    name: str
    top_cm: float


@dataclass(frozen=True)
class EventLayer:
    """An instantaneous deposit (turbidite, tephra, slump, ...), cut out of the age model.

    Attributes
    ----------
    top_cm, bottom_cm : float
        Composite depth of the layer top and bottom [cm], ``top_cm < bottom_cm``.
    kind : str
        Free text, e.g. ``"turbidite"``.
    """

    top_cm: float
    bottom_cm: float
    kind: str = "unspecified"

    @property
    def thickness_cm(self) -> float:
        """Layer thickness [cm]."""
        return self.bottom_cm - self.top_cm


class DepthScale:
    """Conversions between section, composite and event-free depth of one core.

    Parameters
    ----------
    sections : sequence of Section
        Core sections with their composite top depth [cm]; may be empty.
    event_layers : sequence of EventLayer
        Instantaneous deposits in composite depth [cm]; must not overlap.
    hiatuses_cm : sequence of float
        Composite depths of hiatuses [cm]; none may lie strictly inside an event layer.

    Raises
    ------
    ValueError
        For inverted or overlapping event layers, a hiatus inside a layer, or duplicate
        section names. (:mod:`proxies.cores.validation` reports these as problems first.)
    """

    def __init__(
        self,
        sections: Sequence[Section] = (),
        event_layers: Sequence[EventLayer] = (),
        hiatuses_cm: Sequence[float] = (),
    ):
        self.sections = tuple(sections)
        self._section_tops = {s.name: float(s.top_cm) for s in self.sections}
        if len(self._section_tops) != len(self.sections):
            raise ValueError("section names must be unique")
        layers = tuple(sorted(event_layers, key=lambda layer: layer.top_cm))
        for layer in layers:
            if not layer.bottom_cm > layer.top_cm:
                raise ValueError(f"event layer {layer} has bottom not below top")
        for upper, lower in zip(layers, layers[1:]):
            if lower.top_cm < upper.bottom_cm:
                raise ValueError(f"event layers {upper} and {lower} overlap")
        self.event_layers = layers
        self._tops = np.array([layer.top_cm for layer in layers], dtype=float)
        self._thickness = np.array([layer.thickness_cm for layer in layers], dtype=float)
        hiatuses = np.sort(np.asarray(hiatuses_cm, dtype=float))
        if np.any(self.in_event_layer(hiatuses)):
            raise ValueError("a hiatus lies inside an event layer")
        self.hiatuses_cm = tuple(float(h) for h in hiatuses)

    def __repr__(self) -> str:
        return (
            f"DepthScale(sections={len(self.sections)}, event_layers={len(self.event_layers)}, "
            f"hiatuses={len(self.hiatuses_cm)})"
        )

    # -- sections ---------------------------------------------------------------------------
    def composite_depth(self, section: Sequence[str] | str, depth_in_section_cm) -> np.ndarray:
        """Composite depth [cm] from section name(s) and depth below the section top [cm].

        Raises
        ------
        KeyError
            For a section name not among :attr:`sections`.
        """
        depth = np.asarray(depth_in_section_cm, dtype=float)
        names = np.broadcast_to(np.asarray(section, dtype=object), depth.shape)
        tops = np.array([self._section_tops[str(name)] for name in names.ravel()], dtype=float)
        return tops.reshape(depth.shape) + depth

    # -- event layers -----------------------------------------------------------------------
    @property
    def total_cut_cm(self) -> float:
        """Summed thickness of all event layers [cm]."""
        return float(self._thickness.sum())

    def in_event_layer(self, depth_cm) -> np.ndarray:
        """True where a composite depth [cm] lies strictly inside an event layer."""
        depth = np.asarray(depth_cm, dtype=float)
        inside = np.zeros(depth.shape, dtype=bool)
        for top, thickness in zip(self._tops, self._thickness):
            inside |= (depth > top) & (depth < top + thickness)
        return inside

    def event_free_depth(self, depth_cm) -> np.ndarray:
        """Event-free depth [cm] of composite depth(s) [cm]; inside a layer -> its top."""
        depth = np.asarray(depth_cm, dtype=float)
        cut = np.zeros(depth.shape, dtype=float)
        for top, thickness in zip(self._tops, self._thickness):
            cut += np.clip(depth - top, 0.0, thickness)
        return depth - cut

    def composite_from_event_free(self, event_free_cm) -> np.ndarray:
        """Composite depth [cm] of event-free depth(s) [cm] (inverse of :meth:`event_free_depth`).

        At the event-free position of a layer the composite depth of the layer *top* is
        returned; just below it, the depth below the layer bottom.
        """
        free = np.asarray(event_free_cm, dtype=float)
        tops_free = self.event_free_depth(self._tops)
        added = np.zeros(free.shape, dtype=float)
        for top_free, thickness in zip(tops_free, self._thickness):
            added += np.where(free > top_free, thickness, 0.0)
        return free + added

    @property
    def hiatuses_event_free_cm(self) -> tuple[float, ...]:
        """Hiatus depths on the event-free scale [cm]."""
        return tuple(float(h) for h in self.event_free_depth(np.array(self.hiatuses_cm)))
