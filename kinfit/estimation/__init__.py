"""kinfit.estimation"""
