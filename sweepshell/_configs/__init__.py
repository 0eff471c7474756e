"""The packaged copy of the top-level ``configs/`` folder (hydra's ``pkg://sweepshell._configs``).

In a checkout its entries link to ``configs/``; a wheel carries the same files as package data, so a sweep named
by ``sweepshell run NAME`` is found when no ``configs/`` folder is present.
"""
