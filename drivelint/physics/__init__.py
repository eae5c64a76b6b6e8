"""Pure physics of floating gate drives: charge budgets, droop, stress, switching, preferred values.

Every function takes plain floats in SI base units (V, A, F, C, s, Hz, Ohm, W, K) and
works unchanged on pint quantities, so the tests can let pint check the dimensions while
the command line never pays for importing it.
"""
