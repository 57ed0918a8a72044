"""Sub-commands of ``cablekit``: one module each (NAME, HELP, add_arguments, run)."""

# the order in ``cablekit --help``; commands not listed come after, alphabetically
ORDER = ["new", "check", "points", "workspace", "drive", "accuracy", "iso9283", "calibrate", "task",
         "review", "serve", "cache"]
