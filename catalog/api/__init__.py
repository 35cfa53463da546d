"""api: operations on a catalogue that combine the store with computation.

Owns the Python API (:class:`gravicat.Catalogue` in :mod:`.catalogue`; :class:`Entry`,
:class:`Chart` and :func:`load_file` in :mod:`.entry`; numeric callables in :mod:`.numeric`;
:class:`CheckResults` in :mod:`.results`), the one subject syntax ``FILE[:CHART]`` /
``ID[@REVISION][:CHART]`` (:mod:`.subjects`), verification units run in forked children under
CPU-second caps (:mod:`.verifying`), revision history, diffs and restores (:mod:`.history`) and
verification on a Dask cluster (:mod:`.cluster`).

May import: every room below it (``repair``, ``physics``, ``export``, ``engine``, ``format``,
``store``) the settings (``gravicat.config``) and the core contract; never ``cli``.
"""
