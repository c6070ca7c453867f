"""The commented ``afterward.toml`` that ``afterward init`` writes."""

CONFIG_TEMPLATE = '''\
# afterward configuration. Relative paths are relative to this file.
# Rates in the files are read in the curve's `units`; the store keeps decimals (0.0525 = 5.25 %).

[store]
path = "afterward.duckdb"            # the DuckDB file holding the archive and everything built from it

[inbox]                              # used by the scheduled daily run (afterward run / serve)
path = "inbox"
loaded = "inbox/loaded"              # files are moved here after a successful load
refused = "inbox/refused"            # files that could not be read at all are moved here

[schedule]
cron = "30 18 * * 1-5"               # when `afterward serve` runs the daily job (weekdays 18:30)
timezone = "local"                   # "local" (this machine's zone) or an IANA zone, e.g. "Europe/Paris"

# One table per curve; the name after "curves." is the curve's id in every view.
[curves.govt]
files = "govt_*.csv"                 # glob (in the inbox) routing files to this curve
quote = "par"                        # zero | par | discount | simple
compounding = "semiannual"           # continuous | annual | semiannual | quarterly | monthly | simple
                                     # (of the zero and forward rates shown; par quotes: see coupon_frequency)
# coupon_frequency = "annual"        # par quotes only: annual | semiannual | quarterly | monthly coupons;
                                     # default: the compounding (required when that is continuous or simple)
day_count = "ACT/365F"               # ACT/365F | ACT/360 | 30/360 | 30E/360 | ACT/ACT (ISDA)
spot_days = 0                        # spot lag in business days: nW, nM, nY maturities run from the spot
                                     # date (as-of + spot_days); ON, TN, nD from the as-of date; SN = spot + 1
units = "percent"                    # percent | decimal | bp   (of the numbers in the files)
interpolation = "monotone_convex"    # linear_zero | log_linear_discount | monotone_convex | cubic_zero | nss
tenors = ["1M", "3M", "6M", "1Y", "2Y", "3Y", "5Y", "7Y", "10Y", "20Y", "30Y"]   # expected tenors
                                     # labels: ON, TN, SN, nD (business days), nW, nM, nY
frequency = "daily"                  # daily | monthly (observed on the last business day of each month)
date_format = "iso"                  # iso | day_first | month_first (ISO dates are always accepted)
read.skip_rows = 0                   # title lines (sheet rows) above the header to skip (CSV, .xlsx)
read.sheet = 0                       # .xlsx: the sheet's name, or its number counting from 0
read.missing = ["", "N/A", "#N/A", "NA", "-", "--", "null"]   # rate cells that mean "no quote" (any case)
calendar.weekend = ["Sat", "Sun"]    # may be empty
calendar.holidays = []               # e.g. ["2031-12-25"]; and/or calendar.holidays_file = "holidays.csv"
forward.starts = ["0M", "3M", "6M", "1Y", "2Y", "3Y", "5Y", "10Y"]
forward.tenors = ["3M", "1Y", "2Y", "5Y", "10Y"]
realize.tolerance_days = 3           # business days after a target date to look for an observed curve
checks.jump_bp = 75                  # a day-on-day move larger than this is flagged
checks.inversion_pairs = [["3M", "10Y"], ["2Y", "10Y"]]
# checks.severity.jump = "reject"    # reject | warn | info, per check name
model.max_months = 120               # afterward model: month-end panel up to this maturity (24 .. 600 months;
                                     # at most the longest quoted tenor)
model.factors = 5                    # principal components in the term-premium model's state (1 .. 10)
compare.min_history = 60             # afterward compare: outcomes known on the as-of date before the
                                     # premium-adjusted forward is offered
'''
