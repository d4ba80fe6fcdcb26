"""Every figure kinfit draws; the only layer that imports matplotlib.
"""
