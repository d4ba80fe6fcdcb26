"""The command line (parse, call a workflow, print), the workflows it runs and the demos.
"""
