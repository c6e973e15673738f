"""The command line: argument definitions, one function per command, analysis files
(``wstats run``) and the demo run. The only layer that prints to the terminal.

May import every layer below it: ``render``, ``reports``, ``estimation``, ``design``,
``decoding``, ``readers`` and ``errors``.
"""
