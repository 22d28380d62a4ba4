"""Figures made with matplotlib (Agg backend): one module per kind of figure.

``style`` holds the shared look: the Okabe-Ito colour-blind-safe palette for lines and
markers, a perceptually uniform colour map for velocity, and sizes that stay legible
when printed at A4 width.
"""
