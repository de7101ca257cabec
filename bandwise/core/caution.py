"""The caution every bandwise output carries, in one place.

The command line prints it and every report states it: bandwise supports
an analyst's decisions, it does not make them.
"""

from __future__ import annotations

#: One sentence, printed by the command line and written into every report.
CAUTION = ("Caution: these results support, and do not replace, the judgement of a "
           "qualified engineer and the codes that apply locally.")
