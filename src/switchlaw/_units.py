"""Time units a study, a model or a file can declare (shared by the exporters, scans and the
command line)."""

#: Each time unit in seconds.
TIME_UNITS = {"second": 1.0, "minute": 60.0, "hour": 3600.0, "day": 86400.0}
#: Its UDUNITS-2 symbol, for netCDF ``units`` attributes (``h-1`` is per hour).
TIME_SYMBOLS = {"second": "s", "minute": "min", "hour": "h", "day": "d"}
