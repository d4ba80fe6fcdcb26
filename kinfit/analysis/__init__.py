"""kinfit.analysis"""
