"""Scale-out: many points over Parquet datasets as Dask tasks.

``dataset.py`` finds the points and files of a dataset and reads a group of
points from one file at a time; ``tasks.py`` is what a worker runs (the
engine, per group of points, file by file); ``cluster.py`` connects to a
scheduler (a local one in this process unless an address is configured);
``run.py`` builds the tasks, follows their progress, keeps what finished when
a partition fails, and writes the results. Imports point inward: engine and
store, never the API.
"""
