"""crewcut's many-crew layer: territories, balancing, plans, rebalancing, reports and the command line.

``solve`` (the one-crew engine) never imports this package.
"""
__version__ = "0.1.0"
