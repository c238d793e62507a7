"""The ``auditor`` command: a thin layer over the library (parse, call, show, exit code).

``app`` is the typer application and ``main`` the console script's entry. The commands are
plain functions in modules by concern, registered here in the order ``auditor --help`` lists
them:

=======================  ==========================================================
``schedule_commands``    ``check`` (what was read, every problem), ``template``
``modes_command``        ``modes``: natural frequencies of scheduled or one-off panels
``audit_commands``       ``audit`` and ``demo``: the whole job, written to a folder
``resource_commands``    ``rules`` and ``export-templates``: bundled files shown or copied
``calibrate_command``    ``calibrate``: tensions fitted to tap-test recordings
``options``              option choices, help texts and the callbacks that check them
``terminal``             what the commands print: tables, progress, the audit summary
``root``                 the application itself, ``--version`` and ``main``
=======================  ==========================================================
"""

from __future__ import annotations

from auditor.cli.audit_commands import audit_command, demo
from auditor.cli.calibrate_command import calibrate_command
from auditor.cli.modes_command import modes
from auditor.cli.resource_commands import export_templates, rules_command
from auditor.cli.root import app, main
from auditor.cli.schedule_commands import check, template

__all__ = ["app", "main"]

for _name, _command in (("check", check), ("template", template), ("modes", modes),
                        ("audit", audit_command), ("demo", demo), ("rules", rules_command),
                        ("export-templates", export_templates),
                        ("calibrate", calibrate_command)):
    app.command(_name)(_command)
