"""The fixed choices of the exporters that the command line offers (a light module: `oecode export --help`
reads it without loading pandas)."""

#: study_export: the formats a study is exported to.
EXPORT_FORMATS = ("csv", "xlsx", "sav", "dta", "sss")
#: triple_s: the data file layouts and the multiple-response layouts.
SSS_FORMATS = ("fixed", "csv")
SSS_MULTIPLE_LAYOUTS = ("bitstring", "spread")
