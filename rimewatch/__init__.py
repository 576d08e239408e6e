"""rimewatch: refrigerant-cycle monitoring and fault diagnosis for vapor-compression plant.

The subpackages ``physics``, ``detect``, ``store``, ``ingest``, ``report`` and ``sim`` live in the
repository's top-level folders of the same names and install as ``rimewatch.<name>``.
"""

__version__ = "0.1.0"
