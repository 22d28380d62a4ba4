"""Results of a run for people and other programs: the run file, exports, the report.

Imports every stage below it (figures included).
"""
