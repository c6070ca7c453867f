"""Pure computation for afterward: tenors, calendars, day counts, readers, checks, curves, forwards,
realisation and statistics. Nothing here opens the store, calls Prefect or prints."""
