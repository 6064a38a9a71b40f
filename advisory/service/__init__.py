"""The live service, in the order the data flows.

``settings`` (what ``run`` is told; light), ``loop`` (bytes in, frames out, on a fixed
schedule; shared with ``replay``), ``health`` (counters, status state and reason,
duration bins), ``links`` (input with reconnect, output from a bounded queue), ``logs``
(log and cue lines through bounded queues, never blocking), ``build`` (files, tables,
links and record from the settings), ``runner`` (the ``run`` driver: clocks, signals,
shutdown).
"""
