"""Numba kernels of busbudget (private): transient, metrics and batched evaluation.

numba's on-disk cache checks only the source file of each compiled function,
not the files of the functions it calls: an edit of ``transient.py`` would
leave ``evaluate.py``'s cached machine code (which inlines the old transient)
in use.  So every kernel here is cached under one digest of all the modules
of this folder (and ``budget/jit.py``): see :class:`budget.jit.ContentKeyedLocator`.
A new kernel module needs nothing more than to live in this folder.
"""
