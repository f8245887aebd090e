"""The command line, one module per command; argparse is used here and nowhere else."""
