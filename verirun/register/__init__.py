"""The lab register: items, standards, runs and their history, in one database all benches share.

SQLite is the embedded default (a file path: created and migrated on first use, nothing to set
up); a lab of many benches names its PostgreSQL database by URL. The register is used when one
is named, with ``--register`` or the ``VERIRUN_REGISTER`` environment variable; without one,
every command works from the run folders as before. The run folder stays each bench's journal
and the truth: the register is an index of closed records (each stored whole), which
``verirun register rebuild`` can make again from the folders.
"""
