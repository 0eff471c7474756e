"""``foundation_strip``: a strip on an elastic foundation, registered as ``foundation_strip``.

``model.py`` holds the model class and its parameters (its docstring states the equations);
``path.py`` follows the confined strip (wrinkles, folds) on ``continuation.py`` and the discrete
elastica of ``elastica.py``; ``flexure.py`` solves the plate on a fluid foundation in closed form.
"""
