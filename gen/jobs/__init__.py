"""Jobs: one run or one batch part (`run`), finding, checking and merging parts (`batch`), and the
same parts as Dask tasks (`distributed`)."""
