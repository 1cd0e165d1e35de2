"""Calc files: TOML -> validated, frozen spec; safe expressions; units."""
