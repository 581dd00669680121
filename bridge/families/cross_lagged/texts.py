"""Human-readable texts of a compiled cross-lagged model: the long form in words, the generated names."""
from __future__ import annotations

from ...spec import Variant
from .model import CompiledPanel


def long_text(compiled: CompiledPanel) -> str:
    """The long form's lagged regressions in words, with the rows each used."""
    names = compiled.panel.names
    centred = compiled.variant is Variant.RI_CLPM
    lag = "lag centred on the person's mean" if centred else "lag"
    lines = []
    for eq in compiled.equations:
        rhs = " + ".join(f"{names[j]} {lag}" for j in range(len(names)))
        if compiled.variant is Variant.CLPM:
            call = f"statsmodels OLS: {names[eq.outcome]} ~ constant + {rhs}"
            call += " (one regression per wave)" if compiled.paths.value == "wave-specific" else " (all waves pooled)"
        else:
            call = (f"statsmodels MixedLM (array interface, ML): {names[eq.outcome]} ~ constant + {rhs}, "
                    "random intercept by person")
        lines.append(f"{call}; {len(eq.y)} rows")
    return "\n".join(lines) + "\n"


def long_heading(compiled: CompiledPanel) -> str:
    """The heading over the long form's text, naming the library and model actually used."""
    if compiled.variant is Variant.CLPM:
        return "Long form: statsmodels OLS (least squares), one lagged regression per outcome"
    return "Long form: statsmodels MixedLM (ML, array interface), one lagged regression per outcome"


def legend(compiled: CompiledPanel) -> str:
    """What each generated name of the path model stands for."""
    names, waves = compiled.panel.names, compiled.panel.waves
    lines = [f"v{k}_{t} = {name} at wave {w:g} x {compiled.scales[k]:.6g}" for t, w in enumerate(waves)
             for k, name in enumerate(names)]
    lines += {Variant.DYNAMIC_PANEL: [f"h{k} = stable person effect on {n}" for k, n in enumerate(names)],
              Variant.RI_CLPM: [f"k{k} = stable trait of {n}; w{k}_t = within-person part of {n} at wave t"
                                for k, n in enumerate(names)]}.get(compiled.variant, [])
    return "\n".join(lines) + "\n"
