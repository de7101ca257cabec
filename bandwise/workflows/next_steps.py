"""What to do next about a checked mesh, each step in words with the command that does it.

The verdict says whether a mesh is fit for a static run; the next steps say
how to make it so, from what the checks and the zero-energy analysis found:

- a seam (coincident nodes, or free faces lying on each other): merge the
  nodes with ``bandwise merge IN OUT`` (the tolerance the check used is
  passed on), then check the merged mesh again;
- zero-energy modes left free: the holds the zero-energy analysis suggests,
  as the exact ``--support`` options (never applied by bandwise itself);
  without supports, the reminder that a static run needs them;
- other findings at or above the gate: correct the mesh where they say.

Every face shows these values as they are (text, JSON, the report).
"""

from __future__ import annotations

import shlex
from collections.abc import Sequence
from dataclasses import dataclass
from pathlib import Path
from typing import Any

from bandwise.algorithms.checks import CheckOptions
from bandwise.algorithms.checks.findings import Finding
from bandwise.algorithms.checks.verdict import failing

from .supports import SupportAnalysis

#: Finding codes of a seam that merging coincident nodes closes, and what each counts.
SEAM_CODES: dict[str, tuple[str, str]] = {
    "nodes.coincident_seam": ("pair of coincident nodes across parts",
                              "pairs of coincident nodes across parts"),
    "facets.coincident_free": ("pair of free faces lying on each other",
                               "pairs of free faces lying on each other"),
    "nodes.coincident": ("pair of coincident nodes within a part",
                         "pairs of coincident nodes within a part"),
}
#: Finding codes the steps above already answer.
ANSWERED: tuple[str, ...] = (*SEAM_CODES, "supports.free_modes")


@dataclass(frozen=True)
class NextStep:
    """One thing to do before the run.

    Attributes
    ----------
    kind
        ``"merge"``, ``"supports"`` or ``"findings"``.
    advice
        What to do and why, in a sentence or two.
    command
        The exact command or options to type (empty when there is none).
    """

    kind: str
    advice: str
    command: str = ""

    def to_dict(self) -> dict[str, Any]:
        """JSON-ready form."""
        return {"kind": self.kind, "advice": self.advice, "command": self.command}


def merged_name(path: str | Path) -> str:
    """Where a merged copy of ``path`` would go: beside it, ``<stem>-merged<ext>``."""
    p = Path(path)
    return str(p.with_name(f"{p.stem}-merged{p.suffix}"))


def merge_command(path: str | Path, options: CheckOptions | None = None) -> str:
    """``bandwise merge IN OUT`` with the coincidence tolerance the check used."""
    words = ["bandwise", "merge", str(path), merged_name(path)]
    default = CheckOptions()
    if options is not None and options.tolerance is not None:
        words += ["--tolerance", repr(options.tolerance)]
    elif options is not None and options.relative_tolerance != default.relative_tolerance:
        words += ["--relative-tolerance", repr(options.relative_tolerance)]
    return shlex.join(words)


def support_options(supports: SupportAnalysis) -> str:
    """The holds the zero-energy analysis suggests, as ``--support`` options."""
    return " ".join(f"--support {shlex.quote(h.as_option)}"
                    for h in supports.analysis.suggested)


def _modes(n: int) -> str:
    return f"{n} zero-energy mode{'s' * (n != 1)}"


def next_steps(file: str, findings: Sequence[Finding] | None,
               supports: SupportAnalysis | None, fail_on: str = "error",
               options: CheckOptions | None = None) -> tuple[NextStep, ...]:
    """The steps that would make a checked mesh fit for a static run (empty: none needed).

    Parameters
    ----------
    file
        The mesh as given (the merge command reads it).
    findings
        What the checks found (None: nothing was checked, no step).
    supports
        Held DOFs and the zero-energy modes they leave (None: not analysed).
    fail_on
        The gate of the verdict: findings at or above it, other than those the
        steps above answer, are to be corrected.
    options
        The check's settings (its coincidence tolerance goes to the merge command).
    """
    if findings is None:
        return ()
    out = []
    seam = [f for f in findings if f.code in SEAM_CODES]
    answered = set(ANSWERED)
    if any(d.get("parts_after_merge") == 1 for f in seam for d in f.details):
        answered.add("parts.disconnected")    # merging the seam leaves one part
    if seam:
        what = " and ".join(f"{f.count:,} {SEAM_CODES[f.code][f.count != 1]}" for f in seam)
        joined = "; merged, the parts become one" if "parts.disconnected" in answered else ""
        out.append(NextStep(
            "merge", f"Merge the coincident nodes, then check the merged mesh again: {what} "
                     "leave the mesh cut there (the pieces are not joined in the stiffness "
                     f"matrix){joined}.", merge_command(file, options)))
    if supports is not None and supports.free_modes:
        n = supports.free_modes
        holds = support_options(supports)
        if supports.given:
            advice = (f"The supports leave {_modes(n)} free, so a static run would be "
                      "singular: hold more DOFs where the structure is really restrained.")
        else:
            advice = (f"A static run needs supports: without them the mesh has {_modes(n)} "
                      "free (a free-free modal run can go as it is). Give the real restraints "
                      "with --support or --supports FILE.")
        if holds:
            now, again = (" of the mesh as it is now", "; check again after merging") if seam \
                else ("", "")
            advice += (f" These holds would remove every free mode{now} (suggested, not "
                       f"applied: check that they match the real restraints{again}):")
        out.append(NextStep("supports", advice, holds))
    rest = [f for f in failing(list(findings), fail_on) if f.code not in answered]
    if rest:
        codes = ", ".join(dict.fromkeys(f.code for f in rest))
        out.append(NextStep("findings", f"Correct the mesh where the findings say ({codes}), "
                                        "then check it again."))
    return tuple(out)

