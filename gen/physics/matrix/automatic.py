"""The models of the automatic amplitudes: each model file of `gen.physics.tree` as a `Model`
whose parameters are those of the library model it names (its input schemes), the file's extra
parameters and the choice of width treatment. Their processes are not listed: any process the
file's vertices allow is built on demand."""

from __future__ import annotations

from ...keys import NUMBER, Key
from ..tree.model import MODEL_FILES, WIDTH_SCHEMES, ModelFileError, load
from .registry import Model

__all__ = ["automatic_models"]

_EXTRA = {"alpha_s": Key(NUMBER, 0.118, 1e-4, 1.0, "", "strong coupling, fixed (give its value at the process's "
                          "scale)")}


def _make(name: str, base: Model) -> Model:
    tm = load(name)
    unknown = [k for k in tm.takes if k not in base.params]
    if unknown:
        raise ModelFileError(f"{tm.path}: [about] takes: {unknown[0]!r} is not a parameter of the {base.name} model; "
                             f"it has {', '.join(base.params)}")
    params = {k: v for k, v in base.params.items() if not tm.takes or k in tm.takes}
    params.update({k: _EXTRA[k] for k in tm.extra_parameters})
    unstable = any("width" in entry for entry in tm.particles.values())
    params["width_scheme"] = Key(str, tm.widths, doc="widths of unstable particles in propagators: fixed (in "
                                 "time-like propagators only) or complex_mass (m^2 - i m Gamma everywhere, and the "
                                 "couplings that follow from the complex masses)", choices=WIDTH_SCHEMES)
    if not unstable:
        del params["width_scheme"]

    def resolve(over):
        out = dict(base.resolve({k: v for k, v in over.items() if k in params}))
        for k in tm.extra_parameters:
            out[k] = float(over.get(k, _EXTRA[k].default))
        if unstable:
            out["width_scheme"] = str(over.get("width_scheme", tm.widths))
        return out

    def inapplicable(given):
        out = dict(base.inapplicable({k: v for k, v in given.items() if k in params}))
        if given.get("width_scheme") == "complex_mass" and given.get("scheme") == "zpole":
            out["width_scheme"] = ("the zpole scheme takes sin^2 theta as an input, so the complex masses cannot set "
                                   "it; choose scheme = \"fermi\" or \"thomson\"")
        return out

    return Model(name=name, doc=tm.description + " (automatic tree amplitudes of any process the model allows)",
                 params=params, resolve=resolve, mass_params=base.mass_params, width_params=base.width_params,
                 inapplicable=inapplicable, couplings=tuple(c for c in base.couplings if c in params) + tuple(tm.extra_parameters),
                 automatic=name, massless=tm.massless)


def automatic_models(library: dict[str, Model]) -> list[Model]:
    """One Model per shipped model file, its parameters from the library model the file names."""
    return [_make(name, library[load(name).parameters]) for name in MODEL_FILES]
