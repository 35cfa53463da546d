"""gravicat's built-in plugins, registered through the ``gravicat`` entry-point group."""
