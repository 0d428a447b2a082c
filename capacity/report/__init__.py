"""Reporting: plots and tables written by the command line and the studies."""
