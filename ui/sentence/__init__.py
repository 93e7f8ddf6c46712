"""The sentence page: type a message, see every head.

Its Qt-free state (``state``), the entry and prediction bar (``bar``), the head
mosaic (``head_grid``), the close-up (``close_up``), the token arcs
(``token_arcs``), the relevance band (``relevance_band``), the export of its views
(``export``) and the page that lays them out (``page``). May import ``inspector``
and ``ui.widgets``; never another page.
"""
