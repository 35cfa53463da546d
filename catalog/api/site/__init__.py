"""site: the catalogue as a static web site (``gravicat site OUT_DIR``).

:func:`collect` reads the store into plain data, :func:`build_site` renders and writes the pages
(:mod:`.build`); :mod:`.pages` makes the HTML (every catalogue text escaped), :mod:`.parts` the
computed parts (MathML from sympy's presentation printer, orbit landmarks from
:mod:`gravicat.physics.orbits` with an SVG of the effective potential, downloads from the
registered exporters). Templates and the plain CSS and JavaScript are package data
(``templates/``, ``static/``): the site needs no network.

Part of the ``api`` room: may import every room but ``cli``.
"""

from gravicat.api.site.build import SiteReport, build_site, collect

__all__ = ["SiteReport", "build_site", "collect"]
