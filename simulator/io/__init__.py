"""Files: how results leave the program and come back, and nothing else.

At the edge of the pipeline: one atomic writer for every output (a temporary
name unique to the process, renamed after a successful close:
:mod:`~simulator.io.files`), strict JSON with tagged non-finite numbers
(:mod:`~simulator.io.jsontext`), and the HDF5 record format
(:mod:`~simulator.io.recordfile`, docs/records.md). Physics modules never
import this package.
"""
