"""The fit: Cd (or a drag law's parameters) and the launch state from tracks, its noise
statistics and result objects, re-fits and the drag coefficient's measurement model for the
uncertainty budget, model comparison and the test planner.  Never reads files.
"""
