"""Report wording, the blank-schedule resources and the invented demo project (data; mapped into the package by the build)."""
