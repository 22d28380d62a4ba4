"""How sure the model is: ensembles of inversions, the depth band of a surface, extremal
bounds, resolution tests and survey design.

Imports the stages below it (core to analysis); the figures, results and the API
import it.
"""
