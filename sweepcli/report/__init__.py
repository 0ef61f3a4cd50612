"""Summaries, pictures, diffs and exports of results files. Everything here reads the store;
`sample_plot` alone rebuilds one grid point from the stored job to draw its open sample."""
