"""api: operations on a catalogue that combine the store with computation.

Owns revision history, diffs and restores (:mod:`.history`) and the verification queue
(:mod:`.queue`).

May import: every room below it (``repair``, ``physics``, ``export``, ``engine``, ``format``,
``store``) and the core contract; never ``cli``.
"""
