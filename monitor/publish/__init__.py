"""The published site: collect the store into frames, render every page in memory, write with an
atomic swap (see :mod:`monitor.publish.build`).

``build(workspace)`` or ``build(db, config, out)`` is the whole job; ``serve`` previews the
result on 127.0.0.1.
"""

from monitor.publish.build import BuildReport, build, build_site, write_site
from monitor.publish.collect import SiteData, collect

__all__ = ["BuildReport", "SiteData", "build", "build_site", "collect", "write_site"]
