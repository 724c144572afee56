"""Bid-price methods and bounds, one module each; every module registers its solver.

:func:`rmkit.methods.base.load_all` imports each public module here, so adding a file is all it takes
to add a method (see DEVELOPERS.md).
"""
