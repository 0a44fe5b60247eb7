"""The C face of busbudget: build script, header and C examples (see cexport/README.md)."""
