"""The checkpoint stage: open a model folder safely and record what its heads do.

Holds the offline, safetensors-only loader (``loader``), the adapter table that says
where each encoder family keeps its attention parts (``families``), the forward
hooks that capture per-head attention and switch heads off (``capture``), and the
piece/word token views (``tokens``). May import ``inspector.errors`` and
``inspector.paths`` only; every later stage builds on this one.
"""
