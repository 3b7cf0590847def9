"""downcore's orchestration layer: Prefect flows, run config, readers and writers, run folders,
manifests, reports and the ``downcore`` command line. It imports :mod:`proxies`; the science
package never imports this one.
"""

__version__ = "0.1.0"
