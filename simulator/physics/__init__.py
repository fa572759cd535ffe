"""Pure physics functions, one module per topic, each law with its source.

No I/O, no state: SI numbers in, SI numbers out.  Functions that need steam
properties take the backend (:mod:`simulator.steam`) as an argument.
"""
