"""The explain page: gradient- and occlusion-based evidence beside attention for one sentence.

Its Qt-free state (``state``), the word evidence rows (``word_bars``), the per-head
change map (``head_change``), its panels (``panels``) and the page (``page``). May
import ``inspector``, ``ui.widgets`` and the sentence page's small helpers; never the
corpus page.
"""
