"""Summaries, pictures, diffs and exports of results files. Everything here reads the store;
`sample_data` alone rebuilds one grid point from the stored job and solves its open sample;
`sample_plot` draws it."""
