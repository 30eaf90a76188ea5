"""Plots (matplotlib). Import matplotlib only inside these modules, never at CLI start-up."""
