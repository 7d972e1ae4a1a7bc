"""levelfield: watches district election results for partisan asymmetry.

The service: ingest, reduction, measures, flags, scheduler, CLI and publisher.
"""

__version__ = "0.1.0"
