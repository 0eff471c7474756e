"""``foundation_sheet``: a film bonded to a soft substrate, registered as ``foundation_sheet``.

``model.py`` holds the model class and its parameters (its docstring states the equations);
``energy.py`` is the discrete energy of a periodic cell, ``minimize.py`` its minimiser, ``patterns.py`` names the
wrinkle pattern of an equilibrium, ``reference.py`` the closed-form onset it is checked against.
"""
