"""``winkler_column``: a pinned column on a Winkler foundation in closed form, registered as ``winkler_column``.

Cheap and analytic (``model.py``): it exercises every feature of the model seam in the engine's
tests and benchmarks.
"""
