"""kinfit.output"""
