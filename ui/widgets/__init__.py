"""Widgets and helpers shared by every page: the colour map and its legends, signed bars,
matrix maps, hover read-outs, panels, the background job runner and the export dialog.

May import ``inspector`` and Qt; never a page package (``ui.sentence``, ``ui.explain``,
``ui.corpus``).
"""
