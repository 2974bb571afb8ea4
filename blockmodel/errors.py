"""Errors in the user's input: one clear message naming file, line, hole and field."""

from __future__ import annotations

from dataclasses import dataclass

__all__ = ["InputError", "Problem", "setting_error"]


@dataclass(frozen=True)
class Problem:
    """One problem found in an input file (line numbers count the header as line 1)."""

    file: str
    line: int | None
    hole: str | None
    field: str | None
    problem: str

    def row(self) -> tuple[str, str, str, str, str]:
        """The problem as five text cells: file, line, hole, field, problem."""
        return (
            self.file,
            "" if self.line is None else str(self.line),
            self.hole or "",
            self.field or "",
            self.problem,
        )


class InputError(Exception):
    """Bad input: the command line prints it and exits with status 2, without a traceback."""

    def __init__(self, problems: list[Problem] | str):
        if isinstance(problems, str):
            problems = [Problem("", None, None, None, problems)]
        self.problems = list(problems)
        super().__init__(self.table())

    def table(self, limit: int = 200) -> str:
        """Every problem (at most ``limit``) as an aligned text table, or the bare message of a single problem without a location."""
        rows = [("file", "line", "hole", "field", "problem")] + [
            p.row() for p in self.problems[:limit]
        ]
        if len(self.problems) == 1 and not any(rows[1][:4]):
            return rows[1][4]
        widths = [max(len(r[i]) for r in rows) for i in range(4)]
        lines = ["  ".join(r[i].ljust(widths[i]) for i in range(4)) + "  " + r[4] for r in rows]
        if len(self.problems) > limit:
            lines.append(f"... and {len(self.problems) - limit} more problems")
        return f"{len(self.problems)} problem(s) in the input:\n" + "\n".join(lines)


def setting_error(path, key: str, message: str) -> InputError:
    """An error in one setting (``key``) of the project file ``path``."""
    return InputError([Problem(str(path), None, None, key, message)])
