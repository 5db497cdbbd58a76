"""The one family of errors a user can cause.

Every error carries where it happened (file, line, column), the offending text
and one clear sentence.  The CLI turns it into a message on stderr and exit
code 2 in exactly one place (:func:`tauscan.cli.main`).
"""

from __future__ import annotations


#: Exit codes of the command line: no finding, findings, bad input or a tool error.
EXIT_OK, EXIT_FINDINGS, EXIT_ERROR = 0, 1, 2


class TauscanError(Exception):
    """An error in the user's input or settings, with its location.

    Parameters
    ----------
    message:
        One sentence saying what is wrong.
    file, line, col:
        Where (1-based line and column); any may be unknown.
    text:
        The offending source line, shown with a caret under ``col``.
    """

    def __init__(
        self,
        message: str,
        file: str | None = None,
        line: int | None = None,
        col: int | None = None,
        text: str | None = None,
    ) -> None:
        super().__init__(message)
        self.message = message
        self.file = file
        self.line = line
        self.col = col
        self.text = text

    def __reduce__(self):
        # keep the location when the error crosses a process boundary (--jobs)
        return (type(self), (self.message, self.file, self.line, self.col, self.text))

    def where(self) -> str:
        parts = [self.file or "tauscan"]  # no file: an option or the command line itself
        if self.line is not None:
            parts.append(str(self.line))
            if self.col is not None:
                parts.append(str(self.col))
        return ":".join(parts)

    def headline(self) -> str:
        """The one-line form: ``file:line:col: error: message: 'text'``."""
        head = f"{self.where()}: error: {self.message}"
        if self.text is not None:
            shown = self.text.strip()
            if len(shown) > 120:
                shown = shown[:117] + "..."
            head += f": {shown!r}"
        return head

    def render(self) -> str:
        """The headline, then the source line with a caret under the column."""
        out = [self.headline()]
        if self.text is not None and self.col is not None and len(self.text) <= 200:
            out.append("    " + self.text.rstrip("\n").expandtabs(1))
            out.append("    " + " " * max(self.col - 1, 0) + "^")
        return "\n".join(out)

    def __str__(self) -> str:
        return self.headline()


class NetlistSyntaxError(TauscanError):
    """A card that the grammar or the element rules do not accept."""


class ExpressionError(TauscanError):
    """A parameter expression that cannot be parsed or evaluated."""


class HierarchyError(TauscanError):
    """Subcircuit definitions and instances that do not fit together."""


class IncludeError(TauscanError):
    """A missing, unreadable or cyclic ``.include`` / ``.lib``."""


class CircuitError(TauscanError):
    """A circuit that reads but cannot be solved or analysed as given."""


class ConvergenceError(CircuitError):
    """The DC operating point would not settle."""


class SettingsError(TauscanError):
    """A bad command-line option, configuration file or operating-point file."""


class SelectionError(SettingsError):
    """A probe node or source named by the caller that the circuit does not offer.

    The message names the role in plain words (``probe 'out': ...``); the command line
    words it with its option (:meth:`for_command_line`), so API users never see CLI flags.
    """

    def __init__(self, role: str, name: str, reason: str) -> None:
        super().__init__(f"{role} {name!r}: {reason}")
        self.role, self.name, self.reason = role, name, reason

    def __reduce__(self):
        return (type(self), (self.role, self.name, self.reason))

    def for_command_line(self) -> SettingsError:
        """The same error worded with the command-line option (``--probe 'out': ...``)."""
        return SettingsError(f"--{self.role} {self.name!r}: {self.reason}")


def did_you_mean(name: str, candidates) -> str:
    """`` (did you mean 'x'?)`` naming the closest of ``candidates`` (difflib), or ""."""
    import difflib

    close = difflib.get_close_matches(name.lower(), sorted({str(c).lower() for c in candidates}), n=1, cutoff=0.6)
    return f" (did you mean {close[0]!r}?)" if close else ""

