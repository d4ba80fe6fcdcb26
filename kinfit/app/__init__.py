"""kinfit.app"""
