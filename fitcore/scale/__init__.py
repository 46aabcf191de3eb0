"""Scale-out: the same batch engine per partition on a Dask cluster (``dask_engine``).

May import every other room. Only its coordinating functions import dask.
"""
