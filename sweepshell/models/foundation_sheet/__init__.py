"""``foundation_sheet``: a film bonded to a soft substrate, registered as ``foundation_sheet``.

``model.py`` holds the model class and its parameters (its docstring states the equations);
``scales.py`` the onset scales that make it dimensionless, ``point.py`` one point's seeded
minimisations and measured outputs, ``energy.py`` the discrete energy of a periodic cell,
``minimize.py`` its minimiser, ``patterns.py`` names the wrinkle pattern of an equilibrium,
``reference.py`` the closed-form onset it is checked against.
"""
