"""Human-readable texts of both generated specifications, with the legend of generated names."""
from __future__ import annotations

from .growth import CompiledGrowth


def legend(compiled: CompiledGrowth) -> list[str]:
    """What each generated identifier stands for, in the user's names and units."""
    s, shaped = compiled.scaling, compiled.shaped
    desc = shaped.description.data
    outcome = desc.outcome or "outcome"
    time = desc.time or "time"
    lines = [f"y{i} = ({outcome} at wave {w:g} - {s.y_center:.6g}) / {s.y_scale:.6g}"
             for i, w in enumerate(shaped.waves)]
    lines += [f"x{j} = {p.key} / {s.x_scale[j]:.6g}" + (f" (1 when {p.source} is {p.level!r}, reference "
                                                        f"{p.reference!r})" if p.level else "")
              for j, p in enumerate(shaped.predictors)]
    unit = "" if s.t_unit == 1 else f" * {s.t_unit:.6g}"
    lines.append(f"internal time = ({time} - {s.t_origin:g}){unit} / {s.t_scale:.6g}")
    lines += [f"f{t.power} = {t.value} growth factor; k{t.power} = internal time ^ {t.power}" for t in compiled.terms]
    return lines


def mixed_text(compiled: CompiledGrowth, reml: bool) -> str:
    """The long-form call, written against MixedLM's array interface."""
    arrays = compiled.mixed
    return "\n".join([
        "from statsmodels.regression.mixed_linear_model import MixedLM",
        "# one row per observed occasion; columns named as in the legend",
        f"exog = long_frame[{list(arrays.exog_names)!r}]",
        f"exog_re = long_frame[{list(arrays.exog_re_names)!r}]",
        "model = MixedLM(long_frame['y'], exog, groups=long_frame['person'], exog_re=exog_re)",
        f"result = model.fit(reml={reml})",
    ]) + "\n"


def specifications(compiled: CompiledGrowth, reml: bool) -> dict[str, str]:
    return {"wide": compiled.sem_text, "long": mixed_text(compiled, reml), "legend": "\n".join(legend(compiled)) + "\n"}


def pair_specifications(pair) -> dict[str, str]:
    """The wide form from the SEM's compilation and the long form from the mixed model's."""
    reml = pair.plan.reml
    texts = specifications(pair.sem, reml)
    texts["long"] = mixed_text(pair.mixed, reml)
    if not pair.comparable:
        texts["legend"] += "long form:\n" + "\n".join(legend(pair.mixed)) + "\n"
    return texts
