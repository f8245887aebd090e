"""Presenting a result: the text summary, an explanation in words, the map PNG.

These modules work on the result they are given and import nothing from the pipeline."""
