"""Device profiles: what a target FPGA offers and how fast it is (``boards/*.toml``).

A profile is a TOML file with a documented schema (``docs/estimates.md``). Every number in
it is a table ``{ value = ..., source = "..." }``: the source says where the number comes
from (a data sheet as remembered: ``"from memory: ..."``; a tool's device database; or
``"calibrated against nextpnr 0.11 on <date>"``). :func:`load_profile` reads one by name
(``ecp5-25k``) or by path, checks every field and returns a :class:`DeviceProfile`; a bad
file raises :class:`~hwfilter.errors.FilterFileError` naming the file, the field and the
problem.
"""

from __future__ import annotations

import difflib
import math
import tomllib
from dataclasses import dataclass, field
from pathlib import Path

from .errors import FilterFileError

__all__ = [
    "ACCURACY_LABELS",
    "BOARDS_DIR",
    "FAMILIES",
    "SCHEMA_VERSION",
    "DelayModel",
    "DeviceProfile",
    "MappingPass",
    "MultiplierBlock",
    "SynthesisFlow",
    "load_profile",
    "profile_names",
]

#: where the shipped profiles live (the repository's top-level ``boards/``)
BOARDS_DIR = Path(__file__).resolve().parent.parent / "boards"
#: device families the estimator and the synthesis cross-check know
FAMILIES = ("ice40", "ecp5", "gowin", "generic-lut6")
#: the profile schema this module reads
SCHEMA_VERSION = 1
#: how reports name the keys of a profile's ``[accuracy]`` table
ACCURACY_LABELS = {"luts": "LUTs", "fmax": "Fmax"}


@dataclass(frozen=True)
class MultiplierBlock:
    """The device's hard multiplier (DSP) block: operand widths and features.

    ``absorbs_output_register`` / ``absorbs_post_adder``: the synthesis flow packs a
    register after a product, or one addition of the product with another word, into the
    block (so they cost no flip-flops or LUTs). ``block_registers``: how many registers
    in series before a multiplier's data input the flow copies into each block that reads
    them (0: none); a register every reader of which took a copy leaves the fabric.
    ``absorbs_pre_adder``: the flow packs a two-input sum read only by a single-block
    product into the block's pre-adder.
    """

    a_bits: int
    b_bits: int
    signed_only: bool
    pre_adder: bool
    accumulator_bits: int
    absorbs_output_register: bool
    absorbs_post_adder: bool
    block_registers: int = 0
    absorbs_pre_adder: bool = False


@dataclass(frozen=True)
class MappingPass:
    """One pass of the synthesis tool's product-to-block mapping (Yosys ``mul2dsp``).

    A product ``a x b`` (operand widths after the tool's width reduction; for the
    top-level product the wider operand first) fits one block when ``a <= a_bits`` and
    ``b <= b_bits``. A wider one is tiled: the ``a`` operand is cut into chunks of
    ``partial_a_bits`` (less one headroom bit for ``signed_only`` blocks), then the ``b``
    operand likewise, each chunk mapped again, the partial products summed in logic. A
    product or chunk with ``a < min_a_bits``, ``b < min_b_bits`` or a product narrower
    than ``min_product_bits`` is left to the next pass, and after the last pass to logic.
    A mapped product counts ``blocks`` device multipliers.

    Where the device groups its multipliers into sites (the profile's
    ``multiplier_sites``): ``per_site`` cells of this pass share one site, and
    ``site_limit`` (0: none) is the most sites the place-and-route fills once any cell of
    this pass is in the design.
    """

    a_bits: int
    b_bits: int
    min_a_bits: int
    min_b_bits: int
    min_product_bits: int
    partial_a_bits: int
    partial_b_bits: int
    signed_only: bool
    blocks: float
    source: str
    per_site: float = 0.0
    site_limit: int = 0


@dataclass(frozen=True)
class DelayModel:
    """Delays in nanoseconds for the timing estimate (see ``docs/estimates.md``).

    ``lut``: one LUT level; ``carry_entry``: entering and leaving a carry chain;
    ``carry_per_bit``: each bit of the chain; ``multiplier``: a hard multiplier block,
    combinational; ``routing``: the allowance for one net between cells; ``setup`` and
    ``clock_to_out`` of a flip-flop.
    """

    lut: float
    carry_entry: float
    carry_per_bit: float
    multiplier: float
    routing: float
    setup: float
    clock_to_out: float


@dataclass(frozen=True)
class SynthesisFlow:
    """How the synthesis cross-check runs the tools for this family.

    ``yosys`` is the Yosys synthesis command (``synth_ecp5``); ``no_dsp_option`` the
    option that keeps multipliers in logic (empty: the command's default); ``dsp_option``
    the option that enables hard multipliers (empty: on by default); ``nextpnr`` names
    the place-and-route tool from PyPI (``ecp5``, ``ice40``, ``himbaechel-gowin``: the
    tool is ``yowasp-nextpnr-<nextpnr>``) or is empty when none exists;
    ``pin_constraints`` is the text of a pin file for the timing wrapper's seven pins,
    written as ``pins.cst`` beside the netlist (for a tool that will not place
    unconstrained pins; ``nextpnr_args`` names the file); ``timing_not_checked``: why the
    place-and-route's timing is not used for this family (set: it places for the LUT
    count only); ``adder_trees_with_dsp``: the
    flow with hard multipliers splits multi-operand sums into two-input adders (no
    compressor trees); ``lut_cells`` weighs cell types as LUT equivalents (``CCU2C =
    2``); ``dsp_cells`` weighs hard multiplier cells as blocks; ``placed_luts`` names the
    entries of nextpnr's utilization report that count LUTs on the device
    (``TRELLIS_COMB``; Gowin: ``LUT4`` and ``ALU``; empty: the placed count is not
    compared); ``sim_models``: the file of Yosys's cell simulation models for the family
    (relative to Yosys's share folder, ``xilinx/cells_sim.v``; empty: the netlist cannot
    be simulated, as where the hard multiplier has no model).
    """

    yosys: str
    dsp_option: str
    no_dsp_option: str
    nextpnr: str
    nextpnr_args: tuple[str, ...]
    timing_with_dsp: bool
    adder_trees_with_dsp: bool
    lut_cells: dict
    ff_cells: tuple[str, ...]
    dsp_cells: dict
    placed_luts: tuple[str, ...] = ()
    sim_models: str = ""
    pin_constraints: str = ""
    timing_not_checked: str = ""


@dataclass(frozen=True)
class DeviceProfile:
    """A target device: resource counts, hard multipliers, carry chain and delays.

    ``sources`` maps every numeric field (``"counts.luts"``, ``"delay.lut"``...) to
    the source text the file gives for it.
    """

    name: str
    family: str
    part: str
    description: str
    path: str
    luts: int
    lut_inputs: int
    flip_flops: int
    multipliers: int
    block_rams: int
    block_ram_bits: int
    multiplier: MultiplierBlock
    mapping: tuple[MappingPass, ...]
    carry_bits_per_cell: int
    delay: DelayModel
    synthesis: SynthesisFlow
    default_clock_mhz: float | None = None
    # LUT equivalents the place-and-route adds per carry chain (``[logic]
    # chain_end_luts``; 0 where not measured)
    chain_end_luts: int = 0
    # a carry bit whose propagate signal is a plain wire (an increment) needs no LUT
    # (``[logic] free_increment``: the carry cell computes the sum bit itself)
    free_increment: bool = False
    # a flip-flop takes its data only from the LUT beside it (``[logic]
    # register_route_through``): one loaded from another flip-flop, an input, a hard
    # multiplier or a word another flip-flop takes gets a LUT as a route-through, and
    # ``carry_route_through`` of those loaded from a carry-chain sum
    register_route_through: bool = False
    carry_route_through: float = 0.0
    # sites the hard multiplier cells are placed in (``[counts] multiplier_sites``, Gowin
    # DSP macros; 0: the blocks are counted alone), filled as the passes' ``per_site``
    # and ``site_limit`` say
    multiplier_sites: int = 0
    # LUTs per full-adder column of a compressor tree, measured on the family's sums
    # (``[logic] full_adder_luts``; None: two LUT4 or one LUT6 plus 0.2 per tree level)
    full_adder_luts: float | None = None
    sources: dict = field(default_factory=dict, repr=False, compare=False)
    # how close the estimates came to the synthesis tools on this profile, as measured
    # (``"luts"``, ``"fmax"``: text with its source in ``sources["accuracy.<key>"]``)
    accuracy: dict = field(default_factory=dict, compare=False)

    def source(self, key: str) -> str:
        """The source text of field ``key`` (for example ``"delay.lut"``)."""
        return self.sources[key]

    def accuracy_notes(self) -> dict[str, str]:
        """The ``[accuracy]`` texts with their sources, by key (``"luts"``, ``"fmax"``;
        :data:`ACCURACY_LABELS` names them)."""
        return {k: f"{v} ({self.source('accuracy.' + k)})" for k, v in self.accuracy.items()}

    def as_dict(self) -> dict:
        """Plain data (for JSON reports)."""
        m, d = self.multiplier, self.delay
        return {
            "name": self.name,
            "family": self.family,
            "part": self.part,
            "luts": self.luts,
            "lut_inputs": self.lut_inputs,
            "flip_flops": self.flip_flops,
            "multipliers": self.multipliers,
            "block_rams": self.block_rams,
            "multiplier_bits": [m.a_bits, m.b_bits],
            "default_clock_mhz": self.default_clock_mhz,
            "accuracy": dict(self.accuracy),
            "delay_ns": {
                "lut": d.lut,
                "carry_entry": d.carry_entry,
                "carry_per_bit": d.carry_per_bit,
                "multiplier": d.multiplier,
                "routing": d.routing,
                "setup": d.setup,
                "clock_to_out": d.clock_to_out,
            },
        }


def profile_names() -> list[str]:
    """Names of the shipped profiles (files in :data:`BOARDS_DIR`), sorted."""
    return sorted(p.stem for p in BOARDS_DIR.glob("*.toml"))


def load_profile(name_or_path: str | Path) -> DeviceProfile:
    """Read a device profile by shipped name (``ecp5-25k``) or by file path.

    Parameters
    ----------
    name_or_path : str or Path
        A name from :func:`profile_names`, or the path of a profile file.

    Returns
    -------
    DeviceProfile

    Raises
    ------
    FilterFileError
        For an unknown name, an unreadable file, invalid TOML, or any field that is
        missing, of the wrong type, out of range or without a source.
    """
    text = str(name_or_path)
    path = Path(text)
    if not (path.suffix == ".toml" or path.exists() or "/" in text):
        known = profile_names()
        if text not in known:
            close = difflib.get_close_matches(text, known, n=1)
            hint = f" (did you mean {close[0]!r}?)" if close else ""
            raise FilterFileError(
                f"device must be one of {', '.join(known)} or a profile file, not {text!r}{hint}",
                field="device",
            )
        path = BOARDS_DIR / f"{text}.toml"
    src = str(path)
    try:
        raw = path.read_bytes()
    except OSError as e:
        raise FilterFileError(f"cannot read device profile: {e.strerror}", source=src) from e
    try:
        data = tomllib.loads(raw.decode("utf-8"))
    except (UnicodeDecodeError, tomllib.TOMLDecodeError) as e:
        raise FilterFileError(f"is not valid TOML: {e}", source=src) from e
    return _profile(src, data)


# -- reading ----------------------------------------------------------------------------

_TOP_KEYS = (
    "schema",
    "name",
    "family",
    "part",
    "description",
    "default_clock_mhz",
    "counts",
    "multiplier",
    "logic",
    "delay",
    "synthesis",
    "accuracy",
)
_ACCURACY_KEYS = ("luts", "fmax")
_COUNT_KEYS = (
    "luts",
    "lut_inputs",
    "flip_flops",
    "multipliers",
    "block_rams",
    "block_ram_bits",
    "multiplier_sites",
)
_MULT_KEYS = (
    "a_bits",
    "b_bits",
    "signed_only",
    "pre_adder",
    "accumulator_bits",
    "absorbs_output_register",
    "absorbs_post_adder",
    "block_registers",
    "absorbs_pre_adder",
)
_PASS_KEYS = (
    "a_bits",
    "b_bits",
    "min_a_bits",
    "min_b_bits",
    "min_product_bits",
    "partial_a_bits",
    "partial_b_bits",
    "signed_only",
    "blocks",
    "source",
    "per_site",
    "site_limit",
)
#: keys a multiplier pass may leave out
_PASS_OPTIONAL = ("per_site", "site_limit")
_DELAY_KEYS = (
    "lut",
    "carry_entry",
    "carry_per_bit",
    "multiplier",
    "routing",
    "setup",
    "clock_to_out",
)
#: place-and-route tools from PyPI, as ``yowasp-nextpnr-<name>``
_NEXTPNR = ("", "ecp5", "ice40", "himbaechel-gowin")
_SYNTH_KEYS = (
    "yosys",
    "dsp_option",
    "no_dsp_option",
    "nextpnr",
    "nextpnr_args",
    "timing_with_dsp",
    "adder_trees_with_dsp",
    "lut_cells",
    "ff_cells",
    "dsp_cells",
    "placed_luts",
    "sim_models",
    "pin_constraints",
    "timing_not_checked",
    "multiplier_pass",
)


class _Table:
    """One table of a profile: known keys only, sourced values, errors with file + field."""

    def __init__(self, src: str, prefix: str, table, allowed: tuple[str, ...], sources: dict):
        self.src, self.prefix, self.sources = src, prefix, sources
        if not isinstance(table, dict):
            raise FilterFileError(f"must be a table, not {table!r}", source=src, field=prefix)
        for key in table:
            if key not in allowed:
                close = difflib.get_close_matches(str(key), allowed, n=1)
                hint = f" (did you mean {close[0]!r}?)" if close else ""
                raise FilterFileError(
                    f"unknown key{hint}; known keys here: {', '.join(allowed)}",
                    source=src,
                    field=self.field(key),
                )
        self.table = table

    def field(self, key: str) -> str:
        return f"{self.prefix}.{key}" if self.prefix else key

    def error(self, key: str, problem: str) -> FilterFileError:
        return FilterFileError(problem, source=self.src, field=self.field(key))

    def sourced(self, key: str, *, optional: bool = False):
        """The ``value`` of ``{ value = ..., source = "..." }``; records the source."""
        if key not in self.table:
            if optional:
                return None
            raise self.error(key, "is missing")
        t = self.table[key]
        if not isinstance(t, dict) or set(t) != {"value", "source"}:
            raise self.error(key, f'must be a table {{ value = ..., source = "..." }}, not {t!r}')
        s = t["source"]
        if not isinstance(s, str) or not s.strip():
            raise self.error(key, f"source must be a non-empty string, not {s!r}")
        self.sources[self.field(key)] = s
        return t["value"]

    def integer(self, key: str, minimum: int = 0) -> int:
        v = self.sourced(key)
        if not isinstance(v, int) or isinstance(v, bool):
            raise self.error(key, f"value must be an integer, not {v!r}")
        if v < minimum:
            raise self.error(key, f"value must be at least {minimum}, not {v!r}")
        return v

    def delay(self, key: str, *, optional: bool = False, positive: bool = False) -> float | None:
        v = self.sourced(key, optional=optional)
        if v is None:
            return None
        if isinstance(v, bool) or not isinstance(v, (int, float)) or not math.isfinite(v):
            raise self.error(key, f"value must be a finite number, not {v!r}")
        if v < 0 or (positive and v == 0):
            need = "positive" if positive else "zero or positive"
            raise self.error(key, f"value must be {need}, not {v!r}")
        return float(v)

    def flag(self, key: str) -> bool:
        v = self.sourced(key)
        if not isinstance(v, bool):
            raise self.error(key, f"value must be true or false, not {v!r}")
        return v

    def string(self, key: str, *, default: str | None = None) -> str:
        v = self.table.get(key, default)
        if v is None:
            raise self.error(key, "is missing")
        if not isinstance(v, str):
            raise self.error(key, f"must be a string, not {v!r}")
        return v

    def plain_flag(self, key: str, default: bool) -> bool:
        v = self.table.get(key, default)
        if not isinstance(v, bool):
            raise self.error(key, f"must be true or false, not {v!r}")
        return v

    def strings(self, key: str) -> tuple[str, ...]:
        v = self.table.get(key, [])
        if not isinstance(v, list) or not all(isinstance(e, str) for e in v):
            raise self.error(key, f"must be a list of strings, not {v!r}")
        return tuple(v)

    def weights(self, key: str) -> dict:
        v = self.table.get(key, {})
        if not isinstance(v, dict):
            raise self.error(key, f"must be a table of cell type = weight, not {v!r}")
        for cell, w in v.items():
            if isinstance(w, bool) or not isinstance(w, (int, float)) or w < 0:
                raise FilterFileError(
                    f"must be a non-negative number, not {w!r}",
                    source=self.src,
                    field=f"{self.field(key)}.{cell}",
                )
        return dict(v)

    def sub(self, key: str, allowed: tuple[str, ...]) -> _Table:
        if key not in self.table:
            raise self.error(key, "is missing (a table)")
        return _Table(self.src, self.field(key), self.table[key], allowed, self.sources)


def _passes(src: str, s: _Table, block: MultiplierBlock) -> tuple[MappingPass, ...]:
    """The ``[[synthesis.multiplier_pass]]`` tables (one plain pass when there are none)."""
    raw = s.table.get("multiplier_pass")
    if raw is None:
        return (
            MappingPass(
                block.a_bits,
                block.b_bits,
                2,
                2,
                0,
                block.a_bits,
                block.b_bits,
                block.signed_only,
                1.0,
                "default: one pass over the [multiplier] block",
            ),
        )
    if not isinstance(raw, list) or not raw:
        raise s.error("multiplier_pass", f"must be a list of tables, not {raw!r}")
    out = []
    for i, t in enumerate(raw):
        prefix = f"{s.field('multiplier_pass')}[{i}]"
        p = _Table(src, prefix, t, _PASS_KEYS, {})
        for key in _PASS_KEYS:
            if key not in t and key not in _PASS_OPTIONAL:
                raise p.error(key, "is missing")
        ints = {}
        for key in _PASS_KEYS[:7]:
            v = t[key]
            if not isinstance(v, int) or isinstance(v, bool) or v < 0:
                raise p.error(key, f"must be a non-negative integer, not {v!r}")
            ints[key] = v
        if ints["a_bits"] < 2 or ints["b_bits"] < 2:
            raise p.error("a_bits", "a_bits and b_bits must be at least 2")
        for key, cap in (("partial_a_bits", "a_bits"), ("partial_b_bits", "b_bits")):
            if not 2 <= ints[key] <= ints[cap]:
                raise p.error(key, f"must be between 2 and {cap} ({ints[cap]}), not {ints[key]!r}")
        if not isinstance(t["signed_only"], bool):
            raise p.error("signed_only", f"must be true or false, not {t['signed_only']!r}")
        w = t["blocks"]
        if isinstance(w, bool) or not isinstance(w, (int, float)) or w <= 0:
            raise p.error("blocks", f"must be a positive number, not {w!r}")
        if not isinstance(t["source"], str) or not t["source"].strip():
            raise p.error("source", f"must be a non-empty string, not {t['source']!r}")
        per_site = t.get("per_site", 0.0)  # 0: not given
        if "per_site" in t and (
            isinstance(per_site, bool) or not isinstance(per_site, (int, float)) or per_site <= 0
        ):
            raise p.error("per_site", f"must be a positive number, not {per_site!r}")
        limit = t.get("site_limit", 0)
        if isinstance(limit, bool) or not isinstance(limit, int) or limit < 0:
            raise p.error("site_limit", f"must be a non-negative integer, not {limit!r}")
        s.sources[prefix] = t["source"]
        out.append(
            MappingPass(
                **ints,
                signed_only=t["signed_only"],
                blocks=float(w),
                source=t["source"],
                per_site=float(per_site),
                site_limit=limit,
            )
        )
    return tuple(out)


def _profile(src: str, data: dict) -> DeviceProfile:
    sources: dict[str, str] = {}
    top = _Table(src, "", data, _TOP_KEYS, sources)
    schema = data.get("schema")
    if schema != SCHEMA_VERSION:
        raise top.error("schema", f"must be {SCHEMA_VERSION}, not {schema!r}")
    name = top.string("name")
    if not name or any(c.isspace() for c in name):
        raise top.error("name", f"must be a non-empty name without spaces, not {name!r}")
    family = top.string("family")
    if family not in FAMILIES:
        raise top.error("family", f"must be one of {', '.join(FAMILIES)}, not {family!r}")
    part = top.string("part")
    description = top.string("description", default="")
    clock = top.delay("default_clock_mhz", optional=True, positive=True)

    c = top.sub("counts", _COUNT_KEYS)
    luts = c.integer("luts", 1)
    lut_inputs = c.integer("lut_inputs", 2)
    flip_flops = c.integer("flip_flops", 1)
    multipliers = c.integer("multipliers", 0)
    block_rams = c.integer("block_rams", 0)
    block_ram_bits = c.integer("block_ram_bits", 0)
    sites = c.integer("multiplier_sites", 0) if "multiplier_sites" in c.table else 0

    m = top.sub("multiplier", _MULT_KEYS)
    a_bits, b_bits = m.integer("a_bits", 2), m.integer("b_bits", 2)
    if b_bits > a_bits:
        raise m.error("b_bits", f"value must not exceed a_bits ({a_bits}), not {b_bits!r}")
    block = MultiplierBlock(
        a_bits=a_bits,
        b_bits=b_bits,
        signed_only=m.flag("signed_only"),
        pre_adder=m.flag("pre_adder"),
        accumulator_bits=m.integer("accumulator_bits", 0),
        absorbs_output_register=m.flag("absorbs_output_register"),
        absorbs_post_adder=m.flag("absorbs_post_adder"),
        block_registers=m.integer("block_registers", 0) if "block_registers" in m.table else 0,
        absorbs_pre_adder="absorbs_pre_adder" in m.table and m.flag("absorbs_pre_adder"),
    )

    lg = top.sub(
        "logic",
        (
            "carry_bits_per_cell",
            "chain_end_luts",
            "free_increment",
            "register_route_through",
            "carry_route_through",
            "full_adder_luts",
        ),
    )
    carry = lg.integer("carry_bits_per_cell", 1)
    chain_end = lg.integer("chain_end_luts", 0) if "chain_end_luts" in lg.table else 0
    free_increment = "free_increment" in lg.table and lg.flag("free_increment")
    route_through = "register_route_through" in lg.table and lg.flag("register_route_through")
    carry_route = 0.0
    if "carry_route_through" in lg.table:
        carry_route = lg.delay("carry_route_through")
        if carry_route > 1:
            raise lg.error("carry_route_through", f"value must be at most 1, not {carry_route!r}")

    full_adder = None
    if "full_adder_luts" in lg.table:
        full_adder = lg.delay("full_adder_luts", positive=True)

    d = top.sub("delay", _DELAY_KEYS)
    delay = DelayModel(**{k: d.delay(k) for k in _DELAY_KEYS})

    s = top.sub("synthesis", _SYNTH_KEYS)
    nextpnr = s.string("nextpnr", default="")
    if nextpnr not in _NEXTPNR:
        raise s.error(
            "nextpnr",
            f"must be one of {', '.join(n for n in _NEXTPNR if n)} or empty, not {nextpnr!r}",
        )
    placed = s.table.get("placed_luts", [])
    placed = s.strings("placed_luts") if not isinstance(placed, str) else (placed,)
    flow = SynthesisFlow(
        yosys=s.string("yosys"),
        dsp_option=s.string("dsp_option", default=""),
        no_dsp_option=s.string("no_dsp_option", default=""),
        nextpnr=nextpnr,
        nextpnr_args=s.strings("nextpnr_args"),
        timing_with_dsp=s.plain_flag("timing_with_dsp", True),
        adder_trees_with_dsp=s.plain_flag("adder_trees_with_dsp", False),
        lut_cells=s.weights("lut_cells"),
        ff_cells=s.strings("ff_cells"),
        dsp_cells=s.weights("dsp_cells"),
        placed_luts=tuple(c for c in placed if c),
        sim_models=s.string("sim_models", default=""),
        pin_constraints=s.string("pin_constraints", default=""),
        timing_not_checked=" ".join(s.string("timing_not_checked", default="").split()),
    )
    passes = _passes(src, s, block)
    if sites:
        for i, mp in enumerate(passes):
            if not mp.per_site:
                raise FilterFileError(
                    "is missing: counts.multiplier_sites is set, so every pass must say "
                    "how many of its cells share one site",
                    source=src,
                    field=f"{s.field('multiplier_pass')}[{i}].per_site",
                )
    accuracy = {}
    if "accuracy" in data:
        acc = top.sub("accuracy", _ACCURACY_KEYS)
        for key in _ACCURACY_KEYS:
            v = acc.sourced(key, optional=True)
            if v is None:
                continue
            if not isinstance(v, str) or not v.strip():
                raise acc.error(key, f"value must be a non-empty text, not {v!r}")
            accuracy[key] = v
    if flow.placed_luts and not flow.nextpnr:
        raise s.error("placed_luts", "needs a place-and-route tool (nextpnr)")
    if not flow.yosys.startswith("synth_"):
        raise s.error("yosys", f"must be a Yosys synth_* command, not {flow.yosys!r}")
    if not flow.lut_cells or not flow.ff_cells:
        raise s.error("lut_cells", "lut_cells and ff_cells must name the family's cell types")
    return DeviceProfile(
        name=name,
        family=family,
        part=part,
        description=description,
        path=src,
        luts=luts,
        lut_inputs=lut_inputs,
        flip_flops=flip_flops,
        multipliers=multipliers,
        block_rams=block_rams,
        block_ram_bits=block_ram_bits,
        multiplier=block,
        mapping=passes,
        carry_bits_per_cell=carry,
        chain_end_luts=chain_end,
        free_increment=free_increment,
        register_route_through=route_through,
        carry_route_through=carry_route,
        multiplier_sites=sites,
        full_adder_luts=full_adder,
        delay=delay,
        synthesis=flow,
        default_clock_mhz=clock,
        sources=sources,
        accuracy=accuracy,
    )
