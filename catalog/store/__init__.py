"""store: the catalogue on disk (SQLite, or PostgreSQL for a group).

Owns the tables (:mod:`.models`), engines, sessions and schema upgrades (:mod:`.db`), immutable
revisions, the bundled catalogue and saved results (:mod:`.revisions`) and search
(:mod:`.search`).

May import: ``format`` and the core contract. The store never imports the engine, physics,
export, repair, api or cli rooms: storing and querying must not need sympy.
"""
