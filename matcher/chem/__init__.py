"""Chemical identity: CAS numbers, formulas and nominal masses, compound names and name keys, identifiers.

The lowest room above the package's base modules: pure functions, no files, no database.
"""
