"""kinfit.inputs"""
