"""Batch screening: many SMILES, a persistent result store, local or Dask parallelism."""

from .run import BatchEntry, predict_many, read_batch_input  # noqa: F401
