"""Analysis of a run: ray coverage, depth of investigation, iso-velocity surfaces.

Used alike by exports, figures and the report. Imports the stages below it.
"""
