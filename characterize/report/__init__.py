"""Reports: the result document (JSON), a text summary and plots.

Only :mod:`.plots` imports matplotlib, inside its functions.
"""
