"""The core data model, validation rules for core inputs, and depth scales.

- :mod:`proxies.cores.model` -- :class:`Core`;
- :mod:`proxies.cores.depth` -- :class:`Section`, :class:`EventLayer` and :class:`DepthScale`
  (section, composite and event-free depth);
- :mod:`proxies.cores.validation` -- pure checks of already-read tables and ``core.toml``
  mappings, returning :class:`proxies.problems.Problem` lists.

Nothing here reads files; :mod:`pipelines.ingest` does.
"""

from proxies.cores.depth import DepthScale, EventLayer, Section
from proxies.cores.model import Core

__all__ = ["Core", "Section", "EventLayer", "DepthScale"]
