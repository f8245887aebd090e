"""From a loaded table to the matrix the methods score: column roles and feature preparation."""
