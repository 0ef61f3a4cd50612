"""The pure core: arrays in, arrays out. Imports numpy and scipy only."""
