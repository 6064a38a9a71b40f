"""Geodesy on WGS 84 (distances, bearings, the local east-north-up frame) and the
polygon kernels used for no-boom zones."""
