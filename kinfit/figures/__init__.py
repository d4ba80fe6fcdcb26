"""kinfit.figures"""
