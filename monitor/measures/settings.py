"""Settings of the measures engine: the ``[measures]`` section of levelfield.toml.

:class:`MeasureSettings` is built from ``monitor.config.OPTIONS`` (the only schema of the
settings: names, defaults, bounds and help live there). Changing a setting changes results: the
settings enter every stored value's inputs hash.

Examples
--------
>>> MeasureSettings(noise_sd=0.05).noise_sd
0.05
>>> MeasureSettings(min_districts=0, lopsided_variant="student")
Traceback (most recent call last):
...
monitor.config.SettingsError: invalid measures settings: lopsided_variant must be one of 'welch', 'pooled', got 'student'; min_districts must be at least 1, got 0
"""

from __future__ import annotations

from monitor.config import MeasureSettings, SettingsError

__all__ = ["MeasureSettings", "SettingsError"]
