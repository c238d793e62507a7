"""Reading project schedules: workbooks and CSV files → ``auditor.model.Schedule``.

::

    from auditor.schedule import read_schedule, schedule_to_dict, write_template
    schedule = read_schedule(["project.xlsx"])
"""

from __future__ import annotations

from auditor.schedule.inputs import ScheduleFile, input_location
from auditor.schedule.reader import read_rows, read_schedule
from auditor.schedule.serialise import schedule_to_dict
from auditor.schedule.sources import ScheduleFileError
from auditor.schedule.template import write_template
from auditor.schedule.validate import rejected_rows

__all__ = ["read_rows", "read_schedule", "schedule_to_dict", "write_template", "ScheduleFileError",
           "ScheduleFile", "input_location", "rejected_rows"]
