"""The lowest layer: the one error type, shared defaults, atomic file writing, number and
interval formatting and the one adapter to pint. Imports nothing else of kinfit.
"""
