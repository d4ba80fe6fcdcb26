"""kinfit.numerics"""
