"""The growth family (latent growth curve beside a mixed model).

A thin family object over the growth stages that still live in the stage folders
(`bridge.data.prepare`, `bridge.compile.growth`, `bridge.fit`, `bridge.referee.adjudicate`,
`bridge.reconcile.explain`); they move here in a later step.
"""
from __future__ import annotations

from dataclasses import dataclass

from ...progress import Progress
from ...spec import Description, Kind


@dataclass(frozen=True)
class GrowthFamily:
    kind: Kind = Kind.GROWTH
    name: str = "growth"

    def shape(self, description: Description):
        from ...data import shape_data

        return shape_data(description)

    def compile(self, shaped):
        from ...compile import Plan, compile_pair

        return compile_pair(shaped, Plan.from_description(shaped.description))

    def run(self, shaped, progress: Progress):
        from ...compile import Plan
        from ...reconcile.build import reconcile
        from ...reconcile.evaluation import evaluate

        base = evaluate(shaped, Plan.from_description(shaped.description), progress)
        return reconcile(shaped, base, progress)

    def specifications(self, compiled):
        from ...compile.texts import pair_specifications

        texts = pair_specifications(compiled)
        titled = [("wide form: semopy model text", texts["wide"]),
                  ("long form: statsmodels MixedLM, array interface", texts["long"]),
                  ("generated names", texts["legend"])]
        return titled, compiled.sem.correspondence

    def structure_graph(self, compiled):
        from ...compile.graph import model_graph

        return model_graph(compiled.sem)

    def report_parts(self, rec) -> dict:
        from ...compile.graph import model_graph
        from ...reconcile.curves import trajectory_data
        from ...reconcile.summary import figure_estimates, mixed_summary

        return {"mixed": mixed_summary(rec), "trajectories": trajectory_data(rec), "graph": model_graph(rec.pair.sem),
                "estimates": figure_estimates(rec)}


FAMILY = GrowthFamily()
