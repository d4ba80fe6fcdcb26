"""Files to frozen specifications: model files (reactions, rate laws, parameters, priors,
temperature laws), experiment files and data tables, instrument tables, spectra and a fit's
prediction basis. Imports only kinfit.core.
"""
