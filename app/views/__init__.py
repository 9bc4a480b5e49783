"""Views of the design state: each builds its widgets once and refreshes them from an evaluation.

Every view has ``panel`` (the Panel object to lay out) and ``refresh(evaluation)``
which updates data sources and widget values in place — figures are never rebuilt
for a new gain. Views read numbers only from the core's evaluation.
"""
