"""Figures and files for people who were not in the room.

Atomic file writing (``files``), paper sizes and inch-placed pages (``paper``),
captions (``caption``), page writing (``pages``), the matplotlib figures of the
sentence views (``sentence``), the corpus run (``corpus``) and an explanation
(``explanation``), and the printable review report (``report``).
Matplotlib is imported here and nowhere else in the core. May import every
earlier stage's data types; never the command line, never Qt.
"""
