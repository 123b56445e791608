"""Outputs of a sweep: the sweep.json/sweep.csv contract and the text shown in a terminal."""
