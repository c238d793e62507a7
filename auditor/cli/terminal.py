"""What the commands print: progress bars, the problems table, mode tables, the audit summary.

User text (ids, headers, messages) is shown literally: it goes into tables as ``rich.text.Text``
or through ``rich.markup.escape``, never read as markup.
"""

from __future__ import annotations

from rich.markup import escape
from rich.text import Text

__all__ = ["err_console", "progress_bar", "print_problems", "mode_table", "worst_line",
           "print_summary"]

#: How many panels the terminal summary lists (the PDF and the exports list them all).
SUMMARY_PANELS = 40

_VERDICT_STYLE = {"conflict": "bold red", "not assessed": "magenta", "caution": "yellow",
                  "clear": "green"}

_FAMILY_SHORT = {"parallel to length": "∥L", "parallel to width": "∥W",
                 "diameters": " diam.", "circles": " circ.", "nodal domains": " domains"}


def err_console():
    """A console on standard error (progress, and everything but JSON when JSON is asked)."""
    from rich.console import Console

    return Console(stderr=True)


def progress_bar(description: str):
    """A rich progress bar and the ``progress(done, total)`` callable that drives it."""
    from rich.progress import BarColumn, MofNCompleteColumn, Progress, TextColumn, TimeElapsedColumn

    bar = Progress(TextColumn("{task.description}"), BarColumn(), MofNCompleteColumn(),
                   TimeElapsedColumn(), console=err_console(), transient=True)
    task = bar.add_task(description, total=None)

    def update(done: int, total: int) -> None:
        bar.update(task, completed=done, total=total)

    return bar, update


def print_problems(console, problems) -> None:
    """The rejected rows and warnings as one table (nothing when there are none)."""
    from rich.table import Table

    if not problems:
        return
    table = Table(title="Rejected rows and warnings", title_justify="left")
    for head in ("", "File", "Sheet", "Row", "Column", "Record", "Message"):
        table.add_column(head, overflow="fold")
    for q in problems:
        table.add_row(Text(q.severity, style="red" if q.severity == "error" else "yellow"),
                      Text(q.file), Text(q.sheet), "" if q.row is None else str(q.row),
                      Text(q.column), Text(q.record), Text(q.message))
    console.print(table)


def mode_table(panel_id: str, modes, loading: str):
    """One panel's modes: frequency [Hz] with air and in vacuo, multiplicity, participation,
    loss factor and nodal lines."""
    from rich.table import Table

    table = Table(title=f"Panel {escape(panel_id)}", title_justify="left",
                  caption=loading + "  Nodal lines: ∥L parallel to the length, ∥W to the "
                  "width.", caption_justify="left")
    for head in ("mode", "f [Hz]", "in vacuo [Hz]", "×", "participation", "loss factor",
                 "nodal lines"):
        table.add_column(head, justify="right" if head not in ("mode", "nodal lines") else "left")
    for m in modes:
        table.add_row(
            m.label, f"{m.frequency_hz:.2f}",
            "" if m.in_vacuo_hz is None else f"{m.in_vacuo_hz:.2f}",
            str(m.multiplicity), f"{m.participation:.4f}",
            "" if m.loss_factor is None else f"{m.loss_factor:.4f}",
            " ".join(f"{n}{_FAMILY_SHORT.get(family, ' ' + family)}"
                     for family, n in m.nodal_lines),
        )
    return table


def worst_line(panel_result) -> str:
    """The panel's worst finding in one line (findings are worst first)."""
    if not panel_result.findings:
        return panel_result.verdict_reason
    f = panel_result.findings[0]
    e = f.excitation
    tone = (f"{e.band_hz[0]:.1f}–{e.band_hz[1]:.1f} Hz" if e.band_hz
            else f"{e.frequency_hz:.1f} Hz")
    return (f"mode {f.mode.label} {f.mode.frequency_hz:.1f} Hz against {e.equipment} "
            f"{e.description} {tone} ({100 * f.separation:+.1f} %, {f.response_db:+.0f} dB)")


def print_summary(console, result) -> None:
    """The panels that need action, worst first, each with its one remedy; then the totals."""
    from rich.table import Table

    from auditor.remedy import SAFETY_NOTE

    s = result.summary()
    action = [p for p in result.ranked_panels() if p.verdict != "clear"]
    if action:
        table = Table(title="Panels that need attention, worst first", title_justify="left")
        for head in ("Panel", "Verdict", "Assessed to", "Worst finding", "Remedy"):
            table.add_column(head, overflow="fold")
        for p in action[:SUMMARY_PANELS]:
            table.add_row(Text(p.panel.panel),
                          Text(p.verdict, style=_VERDICT_STYLE.get(p.verdict, "")),
                          f"{p.assessed_to_hz:.0f} Hz", Text(worst_line(p)),
                          Text(p.remedy.text if p.remedy else ""))
        console.print(table)
        if len(action) > SUMMARY_PANELS:
            console.print(f"… and {len(action) - SUMMARY_PANELS} more (see the PDF or JSON)")
        if any(p.remedy is not None and p.remedy.work for p in action):
            console.print(Text(SAFETY_NOTE))
    print_problems(console, result.problems)
    console.print(
        f"{s['panels']} panels, {s['equipment']} equipment items, rule set "
        f"'{escape(result.ruleset.name)}': [bold red]{s['conflicts']} conflicts[/] on "
        f"{s['panels_with_conflicts']} panels, [yellow]{s['cautions']} cautions[/], "
        f"[magenta]{s['panels_not_assessed']} panels not assessed[/], "
        f"[green]{s['panels_clear']} panels clear[/]; {s['rejected_rows']} rejected rows, "
        f"{s['warnings']} warnings.")
