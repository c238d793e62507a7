"""Report wording, the blank-schedule resources and the invented demo project.

Data only; the build maps this folder into the package as ``auditor.templates``.
"""
