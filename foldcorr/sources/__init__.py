"""The sources layer: files, datasets and frames in, confusion tensors out.

Nothing here computes a metric.
"""
