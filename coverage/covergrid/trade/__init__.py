"""Trade studies on top of the run: sweeps over design options and the sizing search.

- :mod:`~covergrid.trade.designs`: Walker designs and their evaluation context;
- :mod:`~covergrid.trade.evaluate`: one design -> one row (the numbers);
- :mod:`~covergrid.trade.runner`: many designs, concurrently, each row stored as it ends;
- :mod:`~covergrid.trade.store`: the resumable result store;
- :mod:`~covergrid.trade.tables`, :mod:`~covergrid.trade.figures`: design tables and charts;
- :mod:`~covergrid.trade.sweep`, :mod:`~covergrid.trade.sizing`: the two commands.
"""
