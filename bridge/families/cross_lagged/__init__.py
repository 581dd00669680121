"""The cross-lagged family: CLPM, dynamic panel and RI-CLPM, each beside its long lagged regressions.

Files: `data.py` (shaped data: persons x waves x outcomes, timing), `model.py` (the wide path
models, the long equations, the quantity map, internal scales), `long_fit.py` (the long form's
library adapters), `referee.py` (the long equations as referee designs, translations, SEs),
`fit.py` (both forms with the shared guards and certificates), `causes.py` (the family's causes),
`reconcile.py` (rows, refits, notes), `texts.py`, `graph.py`, `lagged_summary.py`,
`standardised.py` (report parts), `nickell.py`.
"""
from __future__ import annotations

from dataclasses import dataclass

from ...progress import Progress
from ...spec import Description, Kind


@dataclass(frozen=True)
class CrossLaggedFamily:
    kind: Kind = Kind.CROSS_LAGGED
    name: str = "cross-lagged"

    def shape(self, description: Description):
        from .data import shape_panel

        return shape_panel(description)

    def compile(self, shaped):
        from .model import compile_panel

        return compile_panel(shaped)

    def run(self, shaped, progress: Progress):
        from .reconcile import run_panel

        return run_panel(shaped, progress)

    def specifications(self, compiled):
        from .texts import legend, long_heading, long_text

        titled = [("wide form: semopy model text", compiled.sem.text())]
        if compiled.relaxed is not None:
            titled.append(("relaxed wide form (person factors may correlate with the first wave and with each "
                           "other; residuals correlated within a wave)", compiled.relaxed.text()))
        titled += [(long_heading(compiled), long_text(compiled)), ("generated names", legend(compiled))]
        return titled, compiled.correspondence

    def graph(self, compiled, model=None):
        from .graph import panel_graph

        return panel_graph(compiled, model)

    def structure_graph(self, compiled):
        return self.graph(compiled, compiled.relaxed or compiled.sem)

    def nuisance_key(self, compiled, statement) -> str:
        from .graph import nuisance_key

        return nuisance_key(compiled, statement)

    def report_parts(self, rec) -> dict:
        from ...reconcile.summary import figure_estimates
        from .lagged_summary import lagged_summary
        from .standardised import standardised_paths

        return {"graph": self.graph(rec.pair, rec.solution.model), "estimates": figure_estimates(rec),
                "lagged": lagged_summary(rec), "standardised": standardised_paths(rec)}


FAMILY = CrossLaggedFamily()
