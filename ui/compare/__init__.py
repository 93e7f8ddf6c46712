"""The comparison view of a labelled set: what a second model fixed and broke, and which heads changed.

Its Qt-free state (``state``: the run on a worker thread and the text the view paints) and the
view (``view``), which the main window adds to the corpus page as a tab. May import
``inspector``, ``ui.widgets`` and the corpus page's Qt-free request (``ui.corpus.state``); it
opens sentences in the sentence page only through signals the main window connects, and no
other page imports it.
"""
