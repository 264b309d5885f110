"""From a validated filter to its float and quantized graphs.

The steps, each a pass over the graph::

    realize -> [scale section gains] -> [round every product] -> quantize coefficients
            -> quantizer formats (scaling pass, or defaults) -> per-node overrides
            -> full-precision formats for every other node

``form`` and ``section`` may override the file's realization, so that one filter can be
compared across realizations, each with its own format pass.
"""

from __future__ import annotations

import warnings

from .errors import FilterFileError, QuantizationWarning
from .fixed import Format
from .formats import default_quantizer_formats, quantize_coefficients, set_quantizers
from .graph import Graph, GraphError
from .realize import FIR_FORMS, SECTION_FORMS, folding, realize
from .spec import FilterSpec

__all__ = ["float_graph", "quantized_graph", "applicable_realizations", "quantizer_formats"]


def _scaling():
    """The scaling pass module, when it is installed (it arrives with the analysis)."""
    try:
        from . import scaling
    except ImportError:  # pragma: no cover - the analysis package is part of the project
        return None
    return scaling


def float_graph(spec: FilterSpec, *, form: str | None = None, section: str | None = None) -> Graph:
    """The realization's graph with float (design) coefficients and unformatted quantizers."""
    r = spec.realization
    form = form or r.form
    section = section or r.section
    if form in FIR_FORMS and not spec.is_fir:
        raise FilterFileError(
            f"form {form!r} needs an FIR filter; this one has poles",
            source=spec.source,
            field="realization.form",
        )
    try:
        g = realize(
            spec.name,
            b=spec.b,
            a=spec.a,
            sos=spec.sos if form == "cascade" else None,
            zpk=spec.zpk,
            form=form,
            section=section,
            pairing=r.pairing,
            order=r.order,
            gain=r.gain,
        )
    except (ValueError, GraphError) as e:
        raise FilterFileError(str(e), source=spec.source, field="realization") from e
    sc = _scaling()
    if spec.fixed.section_gains and g.sections and form == "cascade" and sc is not None:
        g = sc.scale_section_gains(g)
    if spec.fixed.round_products and sc is not None:
        g = sc.quantize_products(g)
    return g


def _node_rules(fx) -> dict[str, dict]:
    """``[fixed.nodes]`` rounding/overflow overrides as ``{name: {"rounding": ...}}``."""
    return {
        name: {k: v for k, v in (("rounding", ov.rounding), ("overflow", ov.overflow)) if v}
        for name, ov in fx.nodes.items()
    }


def _stable(g: Graph) -> bool:
    from .stability import stability

    return stability(g).stable


def quantizer_formats(spec: FilterSpec, g: Graph) -> dict[str, Format]:
    """Formats of the quantize nodes of a coefficient-quantized graph, overrides applied."""
    fx = spec.fixed
    sc = _scaling()
    scaled = fx.scaling != "none" and sc is not None
    if scaled and not _stable(g):
        # norms of an unstable structure are unbounded: keep the default formats so the
        # analysis can still report the verdict (and what restores stability)
        warnings.warn(
            f"{spec.source}: the quantized {g.form} structure is unstable; scaling "
            f"{fx.scaling!r} cannot apply, default state formats used",
            QuantizationWarning,
            stacklevel=3,
        )
        scaled = False
    if scaled:
        formats = sc.scaled_formats(
            g,
            input_format=fx.input,
            output_format=fx.output,
            state_bits=fx.state_bits,
            scaling=fx.scaling,
            overrides={n: ov.format for n, ov in fx.nodes.items() if ov.format is not None},
            rounding=fx.rounding,
            node_rules=_node_rules(fx),
        )
    else:
        formats = default_quantizer_formats(
            g, input_format=fx.input, output_format=fx.output, state_bits=fx.state_bits
        )
    for name, ov in fx.nodes.items():
        if ov.format is not None and name in formats:
            formats[name] = ov.format
    return formats


def quantized_graph(
    spec: FilterSpec, *, form: str | None = None, section: str | None = None
) -> Graph:
    """The quantized graph: every node has a format, every gain an integer value."""
    g = float_graph(spec, form=form, section=section)
    fx = spec.fixed
    for name in fx.nodes:
        if name not in g:
            quantizers = ", ".join(n.name for n in g.of_kind("quantize"))
            raise FilterFileError(
                f"names no node of this realization; quantize nodes are: {quantizers}",
                source=spec.source,
                field=f"fixed.nodes.{name}",
            )
        if g[name].kind != "quantize":
            raise FilterFileError(
                f"node {name!r} is a {g[name].kind}; only quantize nodes take formats",
                source=spec.source,
                field=f"fixed.nodes.{name}",
            )
    g = quantize_coefficients(g, fx.coefficient_bits)
    formats = quantizer_formats(spec, g)
    rules = _node_rules(fx)
    try:
        return set_quantizers(
            g,
            formats,
            input_format=fx.input,
            rounding=fx.rounding,
            overflow=fx.overflow,
            node_rules=rules,
        )
    except GraphError as e:
        raise FilterFileError(str(e), source=spec.source, field="fixed") from e


def applicable_realizations(spec: FilterSpec) -> list[tuple[str, str | None]]:
    """Every ``(form, section)`` that can realize this filter.

    IIR: the three direct forms, and cascade and parallel with each section form (parallel
    only when the poles are distinct). FIR: the FIR forms (``fir-symmetric`` only for
    symmetric or antisymmetric taps) and the direct forms.
    """

    if spec.is_fir:
        out = [("fir-direct", None), ("fir-transposed", None)]
        if folding(spec.b)[2] is None:
            out.append(("fir-symmetric", None))
        return out
    out = [(f, None) for f in SECTION_FORMS]
    out += [("cascade", s) for s in SECTION_FORMS]
    try:
        from .realize import parallel_sections

        parallel_sections(spec.b, spec.a)
        out += [("parallel", s) for s in SECTION_FORMS]
    except ValueError:
        pass
    return out
