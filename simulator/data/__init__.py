"""Data files shipped with the package: the bundled demo scenario."""
