"""Settings of the measures engine: the ``[measures]`` section of levelfield.toml.

:class:`MeasureSettings` is built from ``monitor.config.OPTIONS`` (the only schema of the
settings: names, defaults, bounds and help live there). Changing a setting changes results: the
settings enter every stored value's inputs hash.
"""

from __future__ import annotations

from monitor.config import MeasureSettings, SettingsError

__all__ = ["MeasureSettings", "SettingsError"]
