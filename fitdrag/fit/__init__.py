"""The fit: Cd (or a drag law's parameters) and the launch state from tracks, its noise
statistics and result objects, model comparison and the test planner.  Never reads files.
"""
