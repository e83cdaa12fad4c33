"""harvester: design calculator for bistable (magnet-coupled) vibration energy harvesters."""

__version__ = "0.1.0"
