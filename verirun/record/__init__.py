"""The run record: what a run is, as stored.

- :mod:`~verirun.record.documents`: one strict model per journal document kind and per part of
  the run record, every field described; the one place documents are composed; both schemas;
- :mod:`~verirun.record.journal`: the hash-chained, fsynced journal of a run folder, read back
  as typed documents (outside this package, documents are read by attribute, never by key), and
  the record file's reading and writing;
- :mod:`~verirun.record.build`: documents to record, one code path for every close;
- :mod:`~verirun.record.verify`: whether a stored run is as recorded;
- :mod:`~verirun.record.amend`: a correction as a new revision;
- :mod:`~verirun.record.listing`: the runs of a folder, summarised.
"""
