"""The gate over the findings: which ones fail a run, and how to show them.

``fail_on`` names the lowest severity that fails: ``error`` (default),
``warning``, ``note``, or ``never``.  :func:`decide_verdict` is the one place
a verdict word is chosen; every face shows the value it returns.
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass

from bandwise.core.errors import InputError

from .findings import SEVERITIES, Finding, severity_rank

#: Accepted values of ``--fail-on``.
FAIL_ON: tuple[str, ...] = (*SEVERITIES, "never")


def check_fail_on(fail_on: str) -> str:
    """Return ``fail_on`` after checking it is one of :data:`FAIL_ON`."""
    if fail_on not in FAIL_ON:
        raise InputError(f"--fail-on must be one of {' | '.join(FAIL_ON)}, got {fail_on!r}")
    return fail_on


def failing(findings: Sequence[Finding], fail_on: str) -> list[Finding]:
    """The findings at or above the ``fail_on`` severity."""
    if check_fail_on(fail_on) == "never":
        return []
    limit = severity_rank(fail_on)
    return [f for f in findings if severity_rank(f.severity) <= limit]


#: The verdict words, one per state a job can be in before a run.
READY = "ready"              # nothing at or above the gate; the supports leave no free mode
UNSUPPORTED = "unsupported"  # nothing at or above the gate, but no supports: modes are free
PROBLEMS = "problems"        # some finding at or above the gate
UNCHECKED = "unchecked"      # nothing could be checked beyond the sizing (a bare pattern)
VERDICTS: tuple[str, ...] = (READY, UNSUPPORTED, PROBLEMS, UNCHECKED)


@dataclass(frozen=True)
class Verdict:
    """One word of :data:`VERDICTS` for a whole file, and the reason in a sentence.

    Every face shows this value as it is: the text output, the JSON and the
    HTML report never decide a verdict of their own.
    """

    word: str
    reason: str

    def __str__(self) -> str:
        return f"{self.word} ({self.reason})"


def decide_verdict(findings: Sequence[Finding] | None, fail_on: str, *,
                   supports_given: bool = False, free_modes: int = 0) -> Verdict:
    """The verdict of one file, from its findings and its zero-energy modes.

    Parameters
    ----------
    findings
        What the checks found, or None when nothing could be checked.
    fail_on
        The gate (:data:`FAIL_ON`): findings at or above it make ``problems``.
    supports_given
        Whether any DOF was held (options, a support file or the deck's cards).
    free_modes
        Rigid-body and mechanism modes the zero-energy analysis leaves free.

    Notes
    -----
    With no supports the static stiffness is singular by construction (a free
    body has rigid-body modes); such a mesh is ``unsupported``, not ``ready``,
    even when every check passes.  A free-free modal run needs exactly that,
    so it is not a failure of the gate.  With supports given, free modes are
    an error finding (``supports.free_modes``) and the verdict is ``problems``.
    """
    if findings is None:
        return Verdict(UNCHECKED, "a matrix pattern without values has nothing to check "
                                  "beyond its size")
    gate = failing(list(findings), fail_on)
    if gate:
        codes = ", ".join(dict.fromkeys(f.code for f in gate))
        return Verdict(PROBLEMS, f"{len(gate)} finding{'s' * (len(gate) != 1)} at or above "
                                 f"{fail_on}: {codes}")
    rest = len(findings)
    tail = f"; {rest} finding{'s' * (rest != 1)} below the gate to review" if rest else ""
    if free_modes and not supports_given:
        return Verdict(UNSUPPORTED, f"no supports given: {free_modes} zero-energy mode"
                                    f"{'s' * (free_modes != 1)} free, so a static solve would "
                                    f"be singular; a free-free modal run is fine{tail}")
    return Verdict(READY, f"nothing at or above {fail_on}"
                          + ("; the supports leave no zero-energy mode" if supports_given
                             else "") + tail)
