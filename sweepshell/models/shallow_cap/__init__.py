"""``shallow_cap``: shallow spherical caps (Föppl–von Kármán), registered as ``shallow_cap``.

``model.py`` holds the model class, its parameters and the choice of grids (its docstring states the
equations); ``solver.py`` traces the batched load paths; ``kernels.py`` is the numpy specification of
the path problem and ``compiled.py`` its numba kernels; ``modes.py`` the non-axisymmetric stability
operators. ``theory.md`` records the numerical decisions and what was measured to make them.
"""
