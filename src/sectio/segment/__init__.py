"""Segmentation: micrograph -> grain label map, or particle mask and labels."""
