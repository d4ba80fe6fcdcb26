"""From fits to chemical answers: ranking of candidate rate laws, initial rates,
activation parameters, the two-stage temperature analysis and predictions.
"""
