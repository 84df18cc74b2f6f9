"""Ride logs: reading a logged ride (fork and rear travel over time) and saying what it shows.

The layout of a log file is described in docs/ride-logs.md.
"""

from tuneopt.ridelog.log import RideLog, load_ridden_setup, parse_ride_log, read_ride_log

__all__ = ["RideLog", "load_ridden_setup", "parse_ride_log", "read_ride_log"]
