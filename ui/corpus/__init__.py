"""The corpus page: run a labelled set, read misfires, head importance, redundancy and pruning.

Its Qt-free state (``state``), the pruning curve (``pruning_plot``) and the page
(``page``). May import ``inspector`` and ``ui.widgets``; opens sentences in the other
pages only through signals the main window connects.
"""
