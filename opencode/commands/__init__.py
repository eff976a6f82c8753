"""One module per group of `oecode` verbs; each has `register(subparsers)` and thin handlers over the library."""
