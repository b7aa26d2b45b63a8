"""Growing the house library: add, confirm, history, retire and merge, with name resolution and the outlier guard.

Decides what may change; :mod:`matcher.store` carries the change out in one transaction.
"""
