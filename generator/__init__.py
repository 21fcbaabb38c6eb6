"""bladesmith: exact, sparse geometric algebra kernels from a TOML spec.

Stages (each a module): spec (load, validate) -> model (names, types) -> derive (exact formulas)
-> optimize (forms, counts) -> emit (per target) -> files + manifest; `reference` is the
independent dense oracle that `verify` compares emitted code against.
"""
__version__ = "0.1.0"
