"""kinfit.core"""
