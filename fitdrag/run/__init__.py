"""Running a measurement: job files, the pipeline from job to certificate, the records database
and the bundled demo.
"""
