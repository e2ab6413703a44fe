"""Databases: guards, reading, bundled files, audits (bundled TDB files live beside this module)."""
