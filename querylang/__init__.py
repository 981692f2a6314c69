"""The strata query language: grammar, parser, AST, checker and compiler.

This package knows the corpus only through :class:`querylang.catalog.Catalog`.
"""
