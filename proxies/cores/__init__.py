"""The core data model, validation rules for core inputs, and depth scales.

- :mod:`proxies.cores.model` -- :class:`Core`, :class:`Section`, :class:`EventLayer`;
- :mod:`proxies.cores.depth` -- :class:`DepthScale` (section, composite and event-free depth);
- :mod:`proxies.cores.validation` -- pure checks of already-read tables and ``core.toml``
  mappings, returning :class:`proxies.problems.Problem` lists.

Nothing here reads files; :mod:`pipelines.ingest` does.
"""

from proxies.cores.depth import DepthScale
from proxies.cores.model import Core, EventLayer, Section

__all__ = ["Core", "Section", "EventLayer", "DepthScale"]
