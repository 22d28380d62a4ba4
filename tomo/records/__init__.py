"""Field records to first-arrival picks: SEG-2 and SEG-Y shot gathers, automatic first
breaks with a per-pick uncertainty, the pick file they go to, and synthetic records.

- ``gather``: the :class:`~tomo.records.gather.Gather` type (traces, timing, geometry).
- ``reading``: one shot record (ObsPy reads the file) into a Gather, positions from the
  headers or a layout file (``layout``); records of one shot stacked.
- ``onset``: characteristic functions (STA/LTA, energy ratio) and the Akaike information
  criterion, vectorised over the traces of a gather.
- ``picker``: first breaks of a gather with their sigma and the reason for every trace
  left unpicked; ``consistency``: the check of each pick against its neighbours.
- ``pickfile``: the pick file and its trace table, hand edits and corrections kept.
- ``synthetic``: shot gathers made from travel times, written as SEG-Y.
- ``workflow``: the ``tomo pick`` job, records in and pick files out.

Survey rank: imports only :mod:`tomo.core` and :mod:`tomo.survey`.
"""
