"""Resource and timing estimates of a quantized graph on a device profile.

The estimate is a pass over the quantized signal-flow graph and a
:class:`~hwfilter.boards.DeviceProfile`. It models what the hardware pass
(:mod:`hwfilter.hdl`) emits and what a synthesis tool makes of it:

- **products**: a gain of zero is a constant, a power of two a shift (a negation when
  negative), any other value a multiplier. A multiplier goes to hard blocks the way the
  synthesis tool tiles it (the profile's mapping passes: wide products take several
  blocks, their partial products summed in logic; too-narrow products stay in logic), or,
  with ``multipliers="logic"``, to partial-product rows in logic (one row per one-bit of
  the constant in two's complement, as a tool without hard multipliers builds it), or,
  with ``multipliers="shift-add"``, to canonical-signed-digit shift-add terms (one row
  per nonzero digit; nonzero digits minus one adders, :mod:`hwfilter.csd`).
- **sums**: a tree of additions whose inner results have no other reader is one
  multi-operand sum: a compressor tree of full adders built word by word as Yosys
  ``maccmap`` builds it, and one carry-chain adder. The tiles of a multi-block product
  join the sum that reads the product whole.
- **quantizers**: the rounding addition (its own carry adder) and, when the word can
  overflow and the rule is saturate, two comparisons on the bits that decide overflow
  and a two-way choice per output bit.
- **carry-chain ends**: the profile's ``chain_end_luts`` for every carry chain built, the
  cells the place-and-route adds at its ends (nextpnr's ECP5 packer: a CCU2C in, one out).
- **route-through LUTs** (profiles with ``register_route_through``, Gowin): a flip-flop
  loaded from a flip-flop, the input, a hard multiplier or a word another flip-flop takes
  costs a LUT, and ``carry_route_through`` of those loaded from a carry-chain sum.
- **registers**: states, pipeline, output and control flip-flops from the hardware plan
  (:func:`hwfilter.hdl.plan`), less registers the profile's blocks absorb.
- **timing**: node times from the profile's delay model on the data-flow graph; the
  longest register-to-register path gives the clock period and Fmax, Parhi's iteration
  bound the fastest sample rate any retiming could reach.

``docs/estimates.md`` documents the model and its calibration against Yosys and nextpnr.
"""

from __future__ import annotations

import math
from collections import Counter
from dataclasses import dataclass, field, replace

from .boards import DeviceProfile, MappingPass
from .csd import csd_digits, nonzero_digits
from .fixed import bits_for_range, is_power_of_two
from .formats import node_ranges
from .graph import Graph
from .timing import critical_path, dataflow_graph, iteration_bound

__all__ = [
    "MULTIPLIER_MODES",
    "ProductMap",
    "MultiplierUse",
    "Estimate",
    "map_product",
    "multiplier_sites",
    "estimate",
]

#: how constant multipliers are built: hard blocks where the tool maps them, logic rows
#: (binary partial products), or canonical-signed-digit shift-add
MULTIPLIER_MODES = ("auto", "logic", "shift-add")


# -- products ---------------------------------------------------------------------------


@dataclass(frozen=True)
class ProductMap:
    """How one product ``a x b`` maps onto hard blocks.

    ``blocks`` weighs the mapped cells (an 18x18 is one block, a 9x9 half of one);
    ``logic_parts`` lists ``(a, b)`` widths of products or chunks left to logic;
    ``partial_adders`` the widths of the adders that sum the tiles; ``adder_levels`` how
    many of them lie in series; ``tiles`` the bit offset of each mapped cell's product
    in the whole product.
    """

    blocks: float
    cells: int
    logic_parts: tuple = ()
    partial_adders: tuple = ()
    adder_levels: int = 0
    tiles: tuple = ()
    # per partial adder: one of its two words is a tile's own product (not a sum)
    raw_tile_adders: tuple = ()
    # the operands the product brings to a sum its tiles join: the offsets of the cells
    # the first pass mapped, and one per chunk it left to a later pass (that chunk is a
    # product of its own, whose tile adders stay apart)
    merge_tiles: tuple = ()
    # widths of the adders inside such chunks (they stay when the tiles join a sum)
    nested_adders: tuple = ()
    # cells mapped by each pass, in the order of the profile's passes
    pass_cells: tuple = ()


def map_product(a_bits: int, b_bits: int, y_bits: int, passes) -> ProductMap:
    """Map a signed ``a_bits x b_bits`` product (``y_bits`` used) through mapping passes.

    Follows the rules of :class:`~hwfilter.boards.MappingPass`: a product left by one pass
    (too narrow) is offered to the next; what is left after the last pass is logic.
    """
    # the last field: the item is a chunk of a product split by an earlier pass
    pending = [(a_bits, b_bits, y_bits, True, True, 0, False)]
    blocks, cells, adders, levels, tiles, raw = 0.0, 0, [], 0, [], []
    merge, nested, per_pass = [], [], []
    for p in passes:
        out = _PassResult()
        chunk = []
        for a, b, y, sa, sb, off, inner in pending:
            n_add, n_left, n_tiles = len(out.adders), len(out.left), len(out.tiles)
            depth = _map_cell(a, b, y, sa, sb, top=True, p=p, out=out, off=off)
            levels = max(levels, depth)
            split = len(out.adders) > n_add
            if inner:
                nested += out.adders[n_add:]
            else:
                merge += out.tiles[n_tiles:]
            for item in out.left[n_left:]:
                chunk.append(inner or split)
                if split and not inner:
                    merge.append(item[5])  # the chunk joins as one operand
        blocks += out.cells * p.blocks
        cells += out.cells
        per_pass.append(out.cells)
        adders += out.adders
        raw += out.raw
        tiles += out.tiles
        # a product the pass leaves becomes a plain product again; a mixed-signedness
        # one takes a bit for the unsigned operand (as Yosys's soft multiplier does)
        pending = []
        for (a, b, y, sa, sb, off), inner in zip(out.left, chunk):
            if sa != sb:
                a, b = (a + 1, b) if not sa else (a, b + 1)
            pending.append((a, b, y, True, True, off, inner))
    logic = tuple((a, b) for a, b, *_ in pending)
    return ProductMap(
        blocks,
        cells,
        logic,
        tuple(adders),
        levels,
        tuple(sorted(tiles)),
        tuple(raw),
        tuple(sorted(merge)),
        tuple(nested),
        tuple(per_pass),
    )


def multiplier_sites(profile: DeviceProfile, pass_cells) -> tuple[int, str]:
    """The sites hard multiplier cells take, and why they do not place (empty: they do).

    ``pass_cells`` counts the cells of each of the profile's mapping passes. Cells of one
    shape (the passes' ``a_bits x b_bits``) fill whole sites, ``per_site`` to a site,
    apart from other shapes; they must fit the profile's ``multiplier_sites``. Once a
    cell of a pass with a ``site_limit`` is in the design, the cells that share sites
    (``per_site`` of 1 or more; not those that span several) fill at most that many
    (docs/estimates.md, DSP sites).
    """
    shares: Counter = Counter()  # sites' worth of cells, by cell shape
    cells: Counter = Counter()  # cells, by cell shape
    spanning = set()  # shapes whose cells span several sites
    limit, by = 0, ""
    for p, n in zip(profile.mapping, pass_cells):
        if n:
            shape = f"{p.a_bits}x{p.b_bits}"
            shares[shape] += n / p.per_site
            cells[shape] += n
            if p.per_site < 1:
                spanning.add(shape)
            if p.site_limit and (not limit or p.site_limit < limit):
                limit, by = p.site_limit, shape
    sites = {shape: math.ceil(v - 1e-9) for shape, v in shares.items()}
    used = sum(sites.values())
    why = ""
    if used > profile.multiplier_sites:
        why = f"the device has {profile.multiplier_sites}"
    elif limit and sum(n for shape, n in sites.items() if shape not in spanning) > limit:
        why = f"with {by} cells in the mix, only {limit} sites take cells that share one"
    if why:
        mix = ", ".join(f"{n} {shape}" for shape, n in cells.items())
        why = f"its multiplier cells ({mix}) need {used} multiplier sites; {why}"
    return used, why


class _PassResult:
    def __init__(self):
        self.cells = 0
        self.adders: list[int] = []
        self.raw: list[bool] = []
        self.left: list[tuple] = []
        self.tiles: list[int] = []


def _map_cell(a, b, y, sa, sb, *, top: bool, p: MappingPass, out: _PassResult, off: int = 0) -> int:
    """One cell through one pass (Yosys mul2dsp rules); returns the adder depth.

    ``off`` is the cell's bit offset in the whole product."""
    if top and a < b:
        a, b, sa, sb = b, a, sb, sa
    if a < p.min_a_bits or b < p.min_b_bits or y < p.min_product_bits:
        out.left.append((a, b, y, sa, sb, off))
        return 0
    head = 1 if p.signed_only else 0
    if top and p.signed_only and not sa and not sb:
        a, b, sa, sb = a + 1, b + 1, True, True
    for wide, other, cap, part, wide_is_a in (
        (a, b, p.a_bits, p.partial_a_bits, True),
        (b, a, p.b_bits, p.partial_b_bits, False),
    ):
        if wide <= cap:
            continue
        step = part - head
        n = (wide - cap + step - 1) // step
        last = wide - n * step
        part_y = min(y, other + part)
        depth = 0
        raw = []
        for i in range(n):
            at = off + i * step
            before = out.cells
            if wide_is_a:
                d = _map_cell(part, b, part_y, bool(head), sb, top=False, p=p, out=out, off=at)
            else:
                d = _map_cell(a, part, part_y, sa, bool(head), top=False, p=p, out=out, off=at)
            raw.append(d == 0 and out.cells == before + 1)  # one tile, read whole
            depth = max(depth, d)
        at = off + n * step
        if wide_is_a:
            d = _map_cell(last, b, b + last, sa, sb, top=False, p=p, out=out, off=at)
        else:
            d = _map_cell(a, last, a + last, sa, sb, top=False, p=p, out=out, off=at)
        depth = max(depth, d)
        out.adders.extend(max(y - (i + 1) * step, 1) for i in range(n))
        out.raw.extend(raw)
        return depth + n
    out.cells += 1
    out.tiles.append(off)
    return 0


def _chunk_luts(a: int, b: int) -> float:
    """LUTs of an ``a x b`` chunk of a tiled constant product left to logic: one adder
    row per bit of the narrower operand past the first (a one-bit chunk is a gate the
    tile adder's LUTs take), two LUT equivalents per bit. Chosen on the Gowin
    calibration designs (17 of 21 within 25 %, against 14 with two per partial-product
    bit); probes with Yosys 0.70 synth_gowin: a 19-bit word times a 16-bit constant
    costs its 17-bit tile adder alone."""
    return 2.0 * (min(a, b) - 1) * max(a, b)


def _odd_width(value: int) -> tuple[int, int]:
    """``(bits, shift)``: width of the odd part of a constant and its trailing zeros."""
    v = abs(value)
    tz = (v & -v).bit_length() - 1
    odd = value >> tz
    return bits_for_range(odd, odd), tz


def _twos_complement_ones(value: int) -> list[int]:
    """Positions of the one-bits of ``value``'s odd part in minimal two's complement."""
    bits, tz = _odd_width(value)
    odd = value >> tz
    word = odd & ((1 << bits) - 1)
    return [tz + j for j in range(bits) if word >> j & 1]


@dataclass(frozen=True)
class MultiplierUse:
    """One constant multiplier: what it multiplies and how it is built.

    ``coefficient_bits`` is the constant's width as a synthesis tool sees it (trailing
    zeros are a shift); ``implementation`` is ``hard`` (blocks), ``logic`` (partial
    product rows) or ``shift-add`` (CSD terms); ``rows`` counts the partial products in
    logic; ``csd_digits`` the nonzero canonical signed digits (shift-add adders are one
    fewer).
    """

    node: str
    value: int
    input_bits: int
    coefficient_bits: int
    product_bits: int
    implementation: str
    blocks: float
    rows: int
    csd_digits: int

    @property
    def shift_add_adders(self) -> int:
        return max(self.csd_digits - 1, 0)

    def as_dict(self) -> dict:
        return {
            "node": self.node,
            "value": self.value,
            "input_bits": self.input_bits,
            "coefficient_bits": self.coefficient_bits,
            "product_bits": self.product_bits,
            "implementation": self.implementation,
            "blocks": self.blocks,
            "rows": self.rows,
            "csd_digits": self.csd_digits,
            "shift_add_adders": self.shift_add_adders,
        }


# -- the estimate -----------------------------------------------------------------------


@dataclass(frozen=True)
class Estimate:
    """Resources and timing of one realization on one device.

    Counts: ``multipliers`` (gains needing a multiplier), ``shifts`` (power-of-two
    gains), ``adders`` (two-input additions of the graph, the textbook count),
    ``delays`` (state words). Resources: ``dsp_blocks``, ``luts`` (LUT equivalents: a
    carry-chain bit counts one), ``registers`` (flip-flop bits; ``register_detail`` by
    purpose). Timing: the ``critical_path`` node sequence and its delay, ``fmax_mhz``,
    ``latency_cycles``, ``cycles_per_sample``, the iteration bound with its loop, and
    sample rates: at ``clock_mhz`` (None when the clock is above Fmax), at Fmax, and the
    iteration bound's limit.
    """

    graph: str
    form: str
    section: str
    device: str
    pipelining: str
    multiplier_mode: str
    multipliers: int
    shifts: int
    adders: int
    delays: int
    dsp_blocks: float
    luts: int
    lut_detail: dict
    registers: int
    register_detail: dict
    critical_path: tuple
    critical_path_ns: float
    fmax_mhz: float
    latency_cycles: int
    cycles_per_sample: int
    iteration_bound_ns: float
    critical_loop: tuple
    clock_mhz: float | None
    sample_rate_hz: float | None
    max_sample_rate_hz: float
    bound_sample_rate_hz: float
    fits: bool
    fit_problems: tuple
    products: tuple = field(default=(), repr=False)
    notes: tuple = ()
    # sites (DSP macros) the hard cells take, where the profile groups blocks into sites
    dsp_sites: int | None = None

    def as_dict(self) -> dict:
        return {
            "graph": self.graph,
            "form": self.form,
            "section": self.section or None,
            "device": self.device,
            "pipelining": self.pipelining,
            "multiplier_mode": self.multiplier_mode,
            "multipliers": self.multipliers,
            "shifts": self.shifts,
            "adders": self.adders,
            "delays": self.delays,
            "dsp_blocks": self.dsp_blocks,
            "dsp_sites": self.dsp_sites,
            "luts": self.luts,
            "lut_detail": dict(self.lut_detail),
            "registers": self.registers,
            "register_detail": dict(self.register_detail),
            "critical_path": list(self.critical_path),
            "critical_path_ns": round(self.critical_path_ns, 3),
            "fmax_mhz": round(self.fmax_mhz, 2),
            "latency_cycles": self.latency_cycles,
            "cycles_per_sample": self.cycles_per_sample,
            "iteration_bound_ns": round(self.iteration_bound_ns, 3),
            "critical_loop": list(self.critical_loop),
            "clock_mhz": self.clock_mhz,
            "sample_rate_hz": self.sample_rate_hz,
            "max_sample_rate_hz": self.max_sample_rate_hz,
            "bound_sample_rate_hz": (
                None if self.bound_sample_rate_hz == float("inf") else self.bound_sample_rate_hz
            ),
            "fits": self.fits,
            "fit_problems": list(self.fit_problems),
            "products": [p.as_dict() for p in self.products],
            "notes": list(self.notes),
        }


@dataclass
class _Leaf:
    """One operand of a sum, in the sum's bit columns ``[lsb, msb)`` (sign-extended up).

    ``rows`` lists the offsets of a logic product's partial-product rows; ``dsp`` names
    a product from one hard block (a block may add it to one more word); ``tiled``
    names a product from several blocks, whose ``tiles`` (offsets) join the sum as
    operands of their own when the sum reads the product whole (see ``_tree_cost``);
    ``late`` marks a word out of a carry chain (a sum or a quantizer after one).
    """

    lsb: int
    msb: int
    rows: tuple = (0,)
    dsp: str = ""
    negated: bool = False
    tiled: str = ""
    tiles: tuple = ()
    late: bool = False
    part: bool = False  # read from above its lowest bit (its low bits pass around)
    alone: bool = True  # no identical product was merged with it (it has one reader)
    node: str = ""  # the graph node read (a word read whole), for register packing


@dataclass
class _Bin:
    """One two-input addition (``op`` ``+`` or ``-``) of the tree the hardware pass writes."""

    a: object
    b: object
    op: str
    lsb: int
    msb: int


def _plain(node: _Bin) -> bool:
    """Whether the hardware pass writes ``node`` as one adder whose output is the word.

    Operands at one offset add directly; ``(a << d) - b`` (the subtrahend lower)
    subtracts whole words. Otherwise the lower operand's extra low bits pass around the
    adder and the word is a concatenation.
    """
    return node.a.lsb == node.b.lsb or (node.op == "-" and node.b.lsb < node.a.lsb)


def _operands(node: _Bin) -> list:
    """The two operands of ``node`` as the sum reads them: ``(operand, lsb, whole,
    negated)``, the operand read from column ``lsb`` (in part when above its own)."""
    a, b = node.a, node.b
    if a.lsb == b.lsb:
        return [(a, a.lsb, True, False), (b, b.lsb, True, node.op == "-")]
    if a.lsb < b.lsb:  # a's low bits pass through; its upper part is added
        return [(a, b.lsb, False, False), (b, b.lsb, True, node.op == "-")]
    if node.op == "+":  # b's low bits pass through
        return [(a, a.lsb, True, False), (b, a.lsb, False, False)]
    # (a << d) - b: the shifted a is read in part, -b needs the whole chain
    return [(a, a.lsb, False, False), (b, b.lsb, True, True)]


@dataclass
class _Zero:
    """A constant-zero term of a sum, at column ``lsb`` (see ``_pair_tree``)."""

    lsb: int


def _pair_tree(terms: list):
    """The balanced tree over signed ``terms`` ``(sign, operand)``, as the hardware pass
    pairs them: equal signs add (keeping the sign), unequal ones subtract the negative
    operand from the positive one. Returns ``(sign, tree)``.

    A term ``_Zero`` is a constant zero the hardware pass still pairs (its adder reads
    the other term alone, and the tool removes it): the pair is the other term."""
    while len(terms) > 1:
        nxt = []
        for (sa, a), (sb, b) in zip(terms[0::2], terms[1::2]):
            if isinstance(a, _Zero) or isinstance(b, _Zero):
                (s, t), z = ((sa, a), b) if isinstance(b, _Zero) else ((sb, b), a)
                if isinstance(t, _Leaf) and t.dsp and z.lsb < t.lsb:
                    # the adder reads the word over the zero's lower columns (constant
                    # bits below its lowest): no block takes that addition
                    t = replace(t, dsp="")
                nxt.append((s, t))
                continue
            lo, hi = min(a.lsb, b.lsb), max(a.msb, b.msb) + 1
            if sa == sb:
                nxt.append((sa, _Bin(a, b, "+", lo, hi)))
            elif sa > 0:
                nxt.append((1, _Bin(a, b, "-", lo, hi)))
            else:
                nxt.append((1, _Bin(b, a, "-", lo, hi)))
        if len(terms) % 2:
            nxt.append(terms[-1])
        terms = nxt
    return terms[0]


# Compressor operands that come out of a carry chain (a sum the tool keeps apart) arrive
# bit by bit, and the mapper duplicates logic to keep the tree fast: the full-adder
# columns cost (1 + LATE_OPERANDS x the share of such operands) times more (chosen by a
# grid search over the 87 Yosys 0.70 synth_ecp5 calibration designs, docs/estimates.md)
LATE_OPERANDS = 0.5


def _compressor(lsbs: list[int], width: int) -> tuple[int, int, int]:
    """Full-adder columns, levels and full-adder cells of the compressor tree Yosys
    ``maccmap`` builds for operands starting at columns ``lsbs`` of a ``width``-column
    sum (see ``_cluster``).

    Words are bit masks over the columns; each level adds them three at a time (one
    ``$fa`` cell per three words).
    """
    top = (1 << width) - 1
    heights = [0] * width
    for lo in lsbs:
        for c in range(max(lo, 0), width):
            heights[c] += 1
    words = [
        sum(1 << c for c in range(width) if heights[c] > k) for k in range(max(heights, default=0))
    ]
    columns = levels = cells = 0
    while len(words) > 2:
        nxt = []
        i = 0
        while i < len(words):
            if i + 2 < len(words):
                a, b, c = words[i : i + 3]
                two = (a & b) | (a & c) | (b & c)
                columns += bin(two).count("1")
                cells += 1
                nxt += [a | b | c, (two << 1) & top]
                i += 3
            else:
                nxt.append(words[i])
                i += 1
        words = [w for w in nxt if w]
        levels += 1
    return columns, levels, cells


def estimate(
    graph: Graph,
    profile: DeviceProfile,
    *,
    pipelining: str = "none",
    clock_mhz: float | None = None,
    multipliers: str = "auto",
) -> Estimate:
    """Estimate resources and timing of a quantized graph on a device.

    Parameters
    ----------
    graph : Graph
        A quantized graph (every node formatted, every gain an integer value).
    profile : DeviceProfile
        The target device (:func:`hwfilter.boards.load_profile`).
    pipelining : str
        The hardware option (:data:`hwfilter.hdl.PIPELININGS`).
    clock_mhz : float, optional
        The clock to report the sample rate at; the profile's default clock when not
        given.
    multipliers : str
        One of :data:`MULTIPLIER_MODES`.

    Returns
    -------
    Estimate

    Raises
    ------
    ValueError
        For an unknown option or a graph that is not quantized.
    """
    from .hdl import plan as hardware_plan
    from .hdl.flipflops import flip_flop_count
    from .hdl.plan import balance_length, read_stage

    if multipliers not in MULTIPLIER_MODES:
        raise ValueError(
            f"multipliers must be one of {', '.join(MULTIPLIER_MODES)}, not {multipliers!r}"
        )
    if clock_mhz is not None and not clock_mhz > 0:
        raise ValueError(f"clock must be a positive frequency in MHz, not {clock_mhz!r}")
    hp = hardware_plan(graph, pipelining=pipelining)  # checks the graph is quantized
    model = _Model(graph, profile, multipliers)
    model.run()

    # -- registers ----------------------------------------------------------------------
    # the hardware pass's flip-flop model: constant, unused and duplicate bits go
    ff = flip_flop_count(graph, hp)
    rb = dict(hp.register_bits)
    for key in ("constant", "unused", "duplicate"):
        if getattr(ff, key):
            rb[key] = -getattr(ff, key)
    absorbed = 0
    if profile.multiplier.absorbs_output_register:
        for name in hp.registered:
            if model.single_block(name):
                absorbed += ff.by_register.get(_reg_name(hp, name), {}).get("kept", 0)
        # iCE40: state registers load with an enable (the sample strobe) and the flow
        # does not pack them into the blocks (observed); Yosys xilinx_dsp on the
        # 6-input-LUT part does (MREG, PREG, CREG, by bits: block_registers_absorbed)
    depth = profile.multiplier.block_registers
    if depth and multipliers == "auto":
        for name, lowest in model.block_registers_absorbed(depth, hp.registered).items():
            kept = ff.by_register.get(name, {}).get("kept_bits", ())
            absorbed += sum(1 for j in kept if j >= lowest)
    if absorbed:
        rb["absorbed"] = -absorbed
    registers = sum(rb.values())

    # -- timing ---------------------------------------------------------------------------
    times = model.times
    extra: dict[tuple[str, str], int] = {}
    for n in graph.nodes:
        if n.kind == "input":
            continue
        at = (
            hp.stages[n.name]
            if n.kind in ("delay", "output")
            else read_stage(graph, n.name, hp.stages, hp.registered)
        )
        for src in n.inputs:
            k = balance_length(graph, src, at, hp.stages, hp.cycles_per_sample)
            if graph[src].kind != "delay" and k:
                extra[(src, n.name)] = extra.get((src, n.name), 0) + k
    for name in hp.registered:
        for user in graph.users(name):
            extra[(name, user.name)] = extra.get((name, user.name), 0) + 1
    clock_dfg = dataflow_graph(graph, times, extra_registers=extra)
    d = profile.delay
    cp = critical_path(clock_dfg, launch=d.clock_to_out, capture=d.routing + d.setup)
    sample_dfg = dataflow_graph(graph, times)
    ib = iteration_bound(sample_dfg)
    fmax = cp.fmax_mhz
    cps = hp.cycles_per_sample
    clock = clock_mhz if clock_mhz is not None else profile.default_clock_mhz
    at_clock = None
    if clock is not None and clock <= fmax:
        at_clock = clock * 1e6 / cps

    # -- fit ------------------------------------------------------------------------------
    problems = []
    if model.dsp_blocks > profile.multipliers:
        problems.append(
            f"needs {model.dsp_blocks:g} multiplier blocks, the device has {profile.multipliers}"
        )
    sites = None
    if profile.multiplier_sites:
        sites, why = multiplier_sites(profile, model.pass_cells)
        if why and model.dsp_blocks <= profile.multipliers:
            problems.append(why)
    # the place-and-route's cells at the ends of every carry chain (profile, measured)
    model.lut_detail["carry chain ends"] = profile.chain_end_luts * model.chains
    if profile.register_route_through:
        fed = _register_feeds(graph, hp, ff, model)
        model.lut_detail["route-through"] = (
            fed["register"] + profile.carry_route_through * fed["carry"]
        )
    luts = round(
        model.luts + model.lut_detail["carry chain ends"] + model.lut_detail.get("route-through", 0)
    )
    if luts > profile.luts:
        problems.append(f"needs about {luts} LUTs, the device has {profile.luts}")
    if registers > profile.flip_flops:
        problems.append(f"needs {registers} flip-flops, the device has {profile.flip_flops}")
    notes = list(model.notes)
    if clock is not None and at_clock is None:
        notes.append(f"the clock {clock:g} MHz is above the estimated Fmax {fmax:.1f} MHz")

    mults = [n for n in graph.of_kind("gain") if _is_multiplier(n)]
    shifts = [
        n for n in graph.of_kind("gain") if n.value not in (None, 0) and is_power_of_two(n.value)
    ]
    return Estimate(
        graph=graph.name,
        form=graph.form,
        section=graph.section_form,
        device=profile.name,
        pipelining=pipelining,
        multiplier_mode=multipliers,
        multipliers=len(mults),
        shifts=len(shifts),
        adders=graph.counts()["adders"],
        delays=len(graph.delays),
        dsp_blocks=model.dsp_blocks,
        luts=luts,
        lut_detail={k: round(v) for k, v in model.lut_detail.items()},
        registers=registers,
        register_detail=rb,
        critical_path=cp.nodes,
        critical_path_ns=cp.delay_ns,
        fmax_mhz=fmax,
        latency_cycles=hp.latency_cycles,
        cycles_per_sample=cps,
        iteration_bound_ns=ib.bound_ns,
        critical_loop=ib.loop,
        clock_mhz=clock,
        sample_rate_hz=at_clock,
        max_sample_rate_hz=fmax * 1e6 / cps,
        bound_sample_rate_hz=ib.max_sample_rate_hz,
        fits=not problems,
        fit_problems=tuple(problems),
        products=tuple(model.products),
        notes=tuple(notes),
        dsp_sites=sites,
    )


def _unused(graph: Graph) -> set[str]:
    """Gains of zero (constant words) and the nodes only they read, transitively: the
    synthesis tool removes their logic."""
    dead = {n.name for n in graph.of_kind("gain") if n.value == 0}
    changed = True
    while changed:
        changed = False
        for n in graph.nodes:
            users = graph.users(n.name)
            if n.name not in dead and users and all(u.name in dead for u in users):
                dead.add(n.name)
                changed = True
    return dead


def _register_feeds(graph: Graph, hp, ff, model) -> Counter:
    """Kept flip-flop bits by what loads them: ``register`` (another flip-flop, the input
    word, a hard multiplier's output, or a word another flip-flop already takes), ``carry``
    (a carry-chain sum) or ``lut``.

    On a fabric whose flip-flop takes its data only from the LUT beside it (the profile's
    ``register_route_through``), the place-and-route gives each of the first kind a LUT
    as a route-through, and some of the second (``carry_route_through``).
    """
    registered = hp.registered  # products with a register after them

    def block(src: str) -> bool:
        return model.mode == "auto" and model.single_block(src)

    def feed(name: str) -> tuple[str, str]:
        """(kind, word) of what computes ``name``, through wiring (shifts, plain
        quantizers, the output)."""
        while True:
            n = graph[name]
            if n.kind in ("input", "delay") or name in registered:
                return "register", name
            if n.kind == "gain":
                if _is_multiplier(n):
                    return ("register" if block(name) else "carry"), name
                if n.value == 0 or n.value < 0:
                    return "lut", name
                name = n.inputs[0]
            elif n.kind == "add":
                return "carry", name
            elif n.kind == "quantize":
                if model._saturates(n):
                    return "lut", name
                if model._dropped(n) > 0 and n.rounding != "floor":
                    return "carry", name
                name = n.inputs[0]
            else:  # output
                name = n.inputs[0]

    out: Counter = Counter()
    taken: set[str] = set()

    def load(reg: str, kind: str, word: str):
        if kind != "register" and word in taken:
            kind = "register"  # the LUT or carry cell already loads a flip-flop
        taken.add(word)
        out[kind] += ff.by_register.get(reg, {}).get("kept", 0)

    for d in graph.of_kind("delay"):
        load(d.name, *feed(d.inputs[0]))
    for r in hp.pipeline_registers:
        if r.kind == "product":
            load(r.name, "register" if block(r.source) else "carry", r.source)
        elif r.kind == "balance" and not r.name.endswith("_d1"):
            load(r.name, "register", r.name)
        else:
            load(r.name, *feed(r.source))
    return out


def _reg_name(hp, node: str) -> str:
    """The flip-flop model's name of a node's register (a delay, or a product register)."""
    for r in hp.pipeline_registers:
        if r.source == node and r.kind == "product":
            return r.name
    return node


def _is_multiplier(node) -> bool:
    return node.kind == "gain" and node.value not in (None, 0) and not is_power_of_two(node.value)


def _representatives(graph: Graph) -> dict[str, str]:
    """The node each node is merged into by a synthesis tool's identical-cell merging.

    Two gains of one value on one signal, two sums of the same words, two quantizers of
    one word with one rule, or two delays of one word, compute the same bits: the tool
    keeps one. Delays are merged by a fixpoint (chains of equal delays merge pairwise).
    """
    order = graph.topological_order()
    rep = {n.name: n.name for n in graph.nodes}
    while True:
        seen: dict[tuple, str] = {}
        new = {}
        for n in order:
            ins = tuple(rep[s] for s in n.inputs)
            if n.kind in ("input", "output"):
                key = (n.kind, n.name)
            elif n.kind == "gain":
                key = ("gain", ins, n.value, n.coefficient_format, n.format)
            elif n.kind == "add":
                key = ("add", ins, n.signs, n.format)
            elif n.kind == "quantize":
                key = ("quantize", ins, n.format, n.rounding, n.overflow)
            else:
                key = ("delay", ins, n.format)
            new[n.name] = seen.setdefault(key, n.name)
        if new == rep:
            return rep
        rep = new


class _Model:
    """The per-node resource and delay model (see the module docstring)."""

    def __init__(self, graph: Graph, profile: DeviceProfile, mode: str):
        self.g = graph
        self.p = profile
        self.mode = mode
        self.d = profile.delay
        self.fa_luts = 1 if profile.lut_inputs >= 6 else 2
        # with hard multipliers some flows split every sum into two-input adders
        self.adder_trees = mode == "auto" and profile.synthesis.adder_trees_with_dsp
        # Yosys's iCE40 DSP packing (techlibs/ice40/ice40_dsp.pmg) has its own rules for
        # the addition it takes into a block: see _tree_cost and _gain
        self.ice40_dsp = self.adder_trees and profile.family == "ice40"
        # Yosys synth_ice40 -dsp runs alumacc again after ice40_dsp: the additions the
        # blocks did not take merge into multi-operand sums (observed 2026-12-03; the
        # generic part's flow does the same, but modelling it there fitted worse, see
        # docs/estimates.md)
        self.merge_after_dsp = self.ice40_dsp
        self._used_blocks: set[str] = set()
        self.pre_adds: set[str] = set()
        self.post_adds: dict[str, str] = {}  # sum in a block -> the word the block adds
        # sum in a block -> its lowest column out of the block's adder (the other word's
        # bits below it pass around the block)
        self.post_add_lsb: dict[str, int] = {}
        self.times: dict[str, float] = {}
        self.luts = 0.0
        self.lut_detail = {"sums": 0.0, "quantizers": 0.0, "multipliers": 0.0}
        self.tile_sums_absorbed = 0
        self.chains = 0  # carry chains built (each costs the profile's chain_end_luts)
        self.dsp_blocks = 0.0
        self.pass_cells = [0] * len(profile.mapping)  # hard cells by mapping pass
        self.products: list[MultiplierUse] = []
        self.notes: list[str] = []
        self._maps: dict[str, ProductMap] = {}
        self._roots: list = []
        self._merged_adds: dict[str, str] = {}
        self._absorbed_here = False
        self._absorbed_sums: set[str] = set()
        self.ranges = node_ranges(graph)
        self.rep = _representatives(graph)
        self._copies = Counter(self.rep.values())
        from .hdl.plan import constant_low_bits

        self.zeros = constant_low_bits(graph)

    # -- helpers ------------------------------------------------------------------------
    def fa_cost(self, levels: int) -> float:
        """LUTs per full-adder column of a compressor tree ``levels`` deep.

        A full adder is two LUT4 (sum and carry) or one dual-output LUT6; the mapper
        duplicates logic in deeper trees: 0.2 LUT per column and level more, up to three
        levels (deeper trees cost no more per column). Fitted on the Yosys 0.70
        synth_ecp5 netlists of the calibration designs, see docs/estimates.md.
        """
        if self.p.full_adder_luts is not None:
            return self.p.full_adder_luts
        return self.fa_luts + 0.2 * min(levels, 3)

    def carry(self, bits: int) -> float:
        return self.d.carry_entry + self.d.carry_per_bit * max(bits, 1)

    def single_block(self, name: str) -> bool:
        m = self._maps.get(self.rep.get(name, name))
        return m is not None and m.cells == 1 and not m.logic_parts and not m.partial_adders

    def absorbed_sum(self, name: str) -> bool:
        return name in self._absorbed_sums

    def _merge_tiles(self, name: str):
        """A product whose tiles join the sum that reads it: no adders of its own, but
        those inside a chunk a later pass mapped (a product of its own, read whole)."""
        m = self._maps[self.rep.get(name, name)]
        top = len(m.partial_adders) - len(m.nested_adders)
        self._add_luts("multipliers", -(sum(m.partial_adders) - sum(m.nested_adders)), chains=-top)
        t = self.d.routing + self.d.multiplier
        if m.nested_adders:
            t += self.d.routing + self.carry(max(m.nested_adders))
        self.times[name] = t

    def _block_takes(self, name: str, other_bits: int) -> bool:
        """ice40_dsp's width rule for the addition a block takes: the word added to the
        product may be no wider than the product's used bits, unless the product has its
        natural width (the multiplier's operand widths summed). Yosys strips a constant's
        trailing zeros before packing, so both widths leave out the product's known-zero
        low bits (Yosys 0.70 techlibs/ice40/ice40_dsp.pmg compares the other operand's
        port width, not the sum's; observed 2026-12-03 on fir15 direct form: a 24-bit
        product plus a 25-bit one goes into the 25-bit product's block)."""
        n = self.g[name]
        src = self.g[n.inputs[0]]
        used = n.format.bits - self.zeros[name]
        natural = src.format.bits - self.zeros[src.name] + _odd_width(n.value)[0]
        return other_bits <= used or used >= natural

    def _only_reader(self, name: str):
        users = self.g.users(name)
        return users[0] if len(users) == 1 else None

    def _add_luts(self, kind: str, n: float, chains: int = 0):
        """``n`` LUTs of ``kind``, in ``chains`` carry chains."""
        self.luts += n
        self.lut_detail[kind] += n
        self.chains += chains

    # -- the pass -----------------------------------------------------------------------
    def run(self):
        g = self.g
        for n in g.nodes:
            self.times[n.name] = 0.0
        self.dead = _unused(g)
        for n in g.of_kind("gain"):
            if n.name not in self.dead:
                self._gain(n)
        self.pre_adds = self._pre_adders()
        self._group_sums()
        self._sum_costs()
        for n in g.of_kind("quantize"):
            if n.name not in self.dead:
                self._quantize(n)
        for name, r in self.rep.items():  # merged copies take their original's time
            self.times[name] = self.times[r]

    def _gain(self, n):
        if self.rep[n.name] != n.name:
            return  # merged with an identical product
        v = n.value
        src = self.g[n.inputs[0]]
        if v == 0 or (is_power_of_two(v) and v > 0):
            return  # a constant or a shift: wires
        if is_power_of_two(v):
            r = self._only_reader(n.name)
            if r is None or r.kind != "add":  # a negation of its own (else: in the sum)
                self._add_luts("sums", n.format.bits, chains=1)
                self.times[n.name] = self.d.routing + self.carry(n.format.bits)
            return
        a = max(src.format.bits - self.zeros[src.name], 1)  # known-zero bits are wiring
        b, _ = _odd_width(v)
        rows = len(_twos_complement_ones(v)) if self.mode == "logic" else nonzero_digits(v)
        if self.mode == "auto":
            m = map_product(a, b, n.format.bits, self.p.mapping)
            self._maps[n.name] = m
            impl = "hard" if m.cells else "logic"
            rows = 0 if m.cells else len(_twos_complement_ones(v))
            self.dsp_blocks += m.blocks
            for i, c in enumerate(m.pass_cells):
                self.pass_cells[i] += c
            if m.cells:
                t = self.d.routing + self.d.multiplier
                for w in m.partial_adders[: m.adder_levels]:
                    t += self.d.routing + self.carry(w)
                self.times[n.name] = t
                adders = m.partial_adders
                if self.ice40_dsp and self.p.multiplier.absorbs_post_adder:
                    # ice40_dsp adds a tile sum inside the block of a tile it reads whole
                    # (a tile's own product, not a sum of tiles), when the sum is no wider
                    # than the accumulator
                    acc = self.p.multiplier.accumulator_bits
                    kept = [w for w, r in zip(adders, m.raw_tile_adders) if w > acc or not r]
                    self.tile_sums_absorbed += len(adders) - len(kept)
                    adders = kept
                elif self.adder_trees and self.p.multiplier.absorbs_post_adder:
                    # Yosys xilinx_dsp adds each tile's partial sum in the next tile's
                    # block (the post-adder, cascaded with its 17-bit shift by
                    # xilinx_dsp_cascade) when the sum fits the accumulator
                    acc = self.p.multiplier.accumulator_bits
                    kept = [w for w in adders if w > acc]
                    self.tile_sums_absorbed += len(adders) - len(kept)
                    adders = kept
                self._add_luts("multipliers", sum(adders), chains=len(adders))
                for pa, pb in m.logic_parts:  # chunks too narrow for a block
                    self._add_luts("multipliers", _chunk_luts(pa, pb))
        else:
            impl = self.mode
        self.products.append(
            MultiplierUse(
                node=n.name,
                value=v,
                input_bits=a,
                coefficient_bits=b,
                product_bits=n.format.bits,
                implementation=impl,
                blocks=self._maps[n.name].blocks if n.name in self._maps else 0.0,
                rows=rows,
                csd_digits=nonzero_digits(v),
            )
        )

    def block_registers_absorbed(
        self, depth: int, registered: frozenset = frozenset()
    ) -> dict[str, int]:
        """Delays that leave the fabric when the flow copies up to ``depth`` registers in
        series before each block multiplier's data input into the block, each with its
        lowest bit that leaves (the bits below stay flip-flops).

        Yosys ``xilinx_dsp`` (AREG/BREG, DREG behind a pre-adder) takes the register
        driving a block's input, then the register driving that one, into the block,
        whatever else reads them (a copy per block). A delay stays in the fabric while its
        word is read there: by a node that is not a block multiplier or an absorbed
        pre-adder (an adder, a quantizer, a product with chunks in logic), by a block
        whose copies stop before it, or by a delay that stays. Identical delays are one
        register (the tool merges them) read by all their readers.

        Around a post-adder the match is by bits: the register the sum loads is the
        block's output register (PREG) for the bits out of the adder, and the register
        of the word the block adds is copied into it (CREG) for the bits the adder reads
        (any contiguous run of a register's bits, sign extension left out). When the
        product's low bits are known zeros, the other word's bits below them pass around
        the block into the sum's low bits: those stay flip-flops in both registers.

        A delay that stores a single-block product, the product's only reader, is the
        block's register after the multiplier (MREG, matched before the post-adder), unless
        the product has a pipeline register of its own (``registered``) in front of it.
        """
        g = self.g
        rep = self.rep
        delays = {rep[n.name] for n in g.of_kind("delay")}
        readers: dict[str, list] = {d: [] for d in delays}
        for n in g.of_kind("delay"):
            readers[rep[n.name]] += [u for u in g.users(n.name) if u.name not in self.dead]

        def block(u):
            m = self._maps.get(rep.get(u.name, u.name))
            return u.kind == "gain" and m is not None and m.cells > 0 and not m.logic_parts

        def bit_of(column: int, root, word) -> int:
            """The bit of ``word`` at ``column`` of the sum ``root``."""
            return max(column - root.format.frac + word.format.frac, 0)

        # a sum the block adds, stored by a delay: that register is the block's output
        # register (PREG, moved) from the adder's lowest column up; the word it adds,
        # when a delay, is copied into the block (CREG) from that column up
        moved: dict[str, int] = {}
        adds_c: dict[str, tuple[str, int]] = {}
        for n in g.of_kind("delay"):
            src = n.inputs[0]
            users = [u for u in g.users(src) if u.name not in self.dead]
            if (
                self.single_block(src)
                and self._copies[rep[src]] == 1
                and len(users) == 1
                and src not in registered
            ):
                moved[rep[n.name]] = 0
        for root, other in self.post_adds.items():
            r = g[root]
            lsb = self.post_add_lsb[root]
            users = [u for u in g.users(root) if u.name not in self.dead]
            if len(users) == 1 and users[0].kind == "delay":
                moved[rep[users[0].name]] = bit_of(lsb, r, users[0])
            if other and other in rep and rep[other] in delays:
                adds_c[root] = (rep[other], bit_of(lsb, r, g[other]))
        read_here = set()  # words read from the fabric by blocks, past their copies
        stays = set()
        low: dict[str, int] = {}  # delays the fabric reads only below this bit
        for d in delays:
            for u in readers[d]:
                c_word, c_bit = adds_c.get(u.name, ("", 0))
                if c_word == d:
                    # copied into the block as its C register; bits below pass around
                    if c_bit:
                        low[d] = max(low.get(d, 0), c_bit)
                    continue
                copies = depth if block(u) else 1 if u.name in self.pre_adds else 0
                if copies:
                    # behind a pre-adder one register (DREG/A2) is copied (counted so)
                    src = d
                    for _ in range(copies):
                        if src not in delays:
                            break
                        src = rep[g[src].inputs[0]]
                    read_here.add(src)
                elif u.kind != "delay":
                    stays.add(d)
        stays |= read_here & delays
        changed = True
        while changed:  # a delay read by a delay that stays (in part) stays too
            changed = False
            for d in delays - stays:
                for u in readers[d]:
                    if u.kind != "delay" or rep[u.name] not in stays | low.keys():
                        continue
                    k = low.get(rep[u.name]) if rep[u.name] not in stays else None
                    if k is None or g[u.name].format != g[d].format:
                        stays.add(d)  # read whole (or at other offsets): stays
                        changed = True
                        break
                    if low.get(d, 0) < k:
                        low[d] = k
                        changed = True
        gone = {d: low.get(d, 0) for d in delays - stays if readers[d]}
        gone.update(moved)  # packed first (xilinx_dsp_pack before xilinx_dsp_packC)
        return gone

    def _pre_adders(self) -> set[str]:
        """Two-input sums the flow takes into a block's pre-adder (Yosys ``xilinx_dsp``):
        the sum is read by one single-block multiplier alone and fits the block's
        ``a_bits`` operand."""
        out = set()
        if not (self.p.multiplier.absorbs_pre_adder and self.mode == "auto"):
            return out
        for n in self.g.of_kind("add"):
            r = self._only_reader(n.name)
            if (
                len(n.inputs) == 2
                and r is not None
                and self.single_block(r.name)
                and n.format.bits <= self.p.multiplier.a_bits
            ):
                out.add(n.name)
        return out

    def _in_logic(self, name: str) -> bool:
        """A gain built from rows (a logic or shift-add multiplier, a shift, a negation)."""
        n = self.g[name]
        if n.kind != "gain" or n.value == 0:
            return False
        if is_power_of_two(n.value):
            return True
        r = self.rep[name]
        return r not in self._maps or not self._maps[r].cells

    def _rows_of_gain(self, n) -> list[int]:
        """Row offsets of a gain built in logic (one per partial product)."""
        v = n.value
        if is_power_of_two(v):
            return [abs(v).bit_length() - 1]
        if self.mode == "shift-add":
            return [i for i, dgt in enumerate(csd_digits(v)) if dgt]
        return _twos_complement_ones(v)

    def _group_sums(self):
        """Find the sums: adds whose reader is not an add they merge into."""
        g = self.g
        self._merged_adds: dict[str, str] = {}
        for n in g.of_kind("add"):
            r = self._only_reader(n.name)
            if r is not None and r.kind == "add":
                self._merged_adds[n.name] = r.name
        roots = [
            n
            for n in g.of_kind("add")
            if n.name not in self._merged_adds
            and self.rep[n.name] == n.name
            and n.name not in self.dead
            and n.name not in self.pre_adds  # inside the block
        ]
        # logic products whose reader is not a sum are sums of their own rows
        for n in g.of_kind("gain"):
            if (
                self._in_logic(n.name)
                and not is_power_of_two(n.value)
                and self.rep[n.name] == n.name
            ):
                r = self._only_reader(n.name)
                if r is None or r.kind != "add":
                    roots.append(n)
        self._roots = roots

    def _terms(self, name: str, frac: int) -> list:
        """The operands of add ``name`` in a sum whose columns have ``frac`` fraction bits."""
        g = self.g
        n = g[name]
        out = []
        for sign, src in zip(n.signs, n.inputs):
            sn = g[src]
            if src in self.dead:
                # a constant zero: no operand, but with Yosys's iCE40 DSP packing the
                # two-input adders it leaves stay as written, so it keeps its place in
                # the pairing (fir15 direct form, observed 2026-12-03)
                if self.ice40_dsp:
                    out.append((sign, _Zero(frac - sn.format.frac + self.zeros[src])))
                continue
            off = frac - sn.format.frac
            z = self.zeros[src]  # known-zero low bits enter as wiring, not as adder inputs
            if sn.kind == "add" and self._merged_adds.get(src) == name:
                sub_terms = self._terms(src, frac)
                if not sub_terms:
                    continue
                sub_sign, sub = _pair_tree(sub_terms)
                out.append((sign * sub_sign, sub))  # maybe a _Zero: a sum of constant zeros
            elif sn.kind == "gain" and self._in_logic(src) and self._only_reader(src) is n:
                rows = self._rows_of_gain(sn)
                zin = self.zeros[sn.inputs[0]]
                width = g[sn.inputs[0]].format.bits - zin
                off += zin
                lo = off + min(rows)
                leaf = _Leaf(
                    lo,
                    off + max(rows) + width,
                    tuple(r - min(rows) for r in rows),
                    negated=sn.value < 0 and len(rows) == 1,
                )
                out.append((sign, leaf))
            else:
                only = self._only_reader(src) is n
                dsp = src if self.single_block(src) and only else ""
                lo = off + min(z, sn.format.bits - 1)
                r = self.rep.get(src, src)
                m = self._maps.get(r)
                alone = self._copies[r] == 1  # no identical product merged with it
                if only and alone and m is not None and len(m.tiles) > 1 and not m.logic_parts:
                    leaf = _Leaf(lo, off + sn.format.bits, tiled=src, tiles=m.merge_tiles)
                else:
                    late = sn.kind in ("add", "quantize")  # out of a carry chain
                    leaf = _Leaf(
                        lo, off + sn.format.bits, dsp=dsp, late=late, alone=alone, node=src
                    )
                out.append((sign, leaf))
        return out

    def _sum_costs(self):
        g = self.g
        for root in self._roots:
            if root.kind == "gain":  # a logic product standing alone
                rows = self._rows_of_gain(root)
                width = g[root.inputs[0]].format.bits
                leaf = _Leaf(min(rows), max(rows) + width, tuple(r - min(rows) for r in rows))
                luts, t = self._cluster([leaf], root.format.bits, absorb=False)
                self._add_luts("multipliers", luts)
                self.times[root.name] = t
                continue
            terms = self._terms(root.name, root.format.frac)
            if not terms:
                continue  # a sum of constant zeros
            sign, tree = _pair_tree(terms)
            if isinstance(tree, _Zero):
                continue  # a sum of constant zeros
            if sign < 0 and isinstance(tree, _Leaf):  # a negation
                tree = replace(tree, negated=True)
            width = root.format.bits
            extra = []
            q = self._only_reader(root.name)
            if q is not None and q.kind == "quantize":
                # the rounding addition reads the sum in part ((v >> (k - 1)) + 1 for
                # half-up): it stays an adder of its own (see _quantize)
                if q.overflow == "wrap" or not self._saturates(q):
                    # bits above the kept word are never read: the tool drops them
                    width = min(width, g[q.inputs[0]].format.frac - q.format.frac + q.format.bits)
            luts, t = self._tree_cost(tree, width, extra, root.name)
            self._add_luts("sums", luts)
            self.times[root.name] = t

    def _tree_cost(self, tree, width: int, extra: list, root: str) -> tuple[float, float]:
        """LUTs and delay of one sum tree: which additions share one compressor.

        The hardware pass adds two words at different offsets by passing the lower
        word's extra low bits through as wiring and adding its upper part: that word is
        then read in part, so the tool keeps its addition apart (its result is one operand
        of the addition above; Yosys ``alumacc`` merges only results read whole). A word
        read whole merges: its operands join the addition above in one multi-operand sum
        (a compressor tree and one carry-chain adder), but only when it is a plain
        adder output: a result whose low bits were passed around its adder is a
        concatenation, which the tool does not merge either.
        """
        leaves: list = list(extra)
        luts = 0.0
        child_time = 0.0

        def operand(node, lsb: int, whole: bool, negated: bool = False):
            nonlocal luts, child_time
            if isinstance(node, _Leaf) and self.adder_trees and len(node.rows) > 1:
                # a logic product is a sum of its own rows, then one operand here
                sub_luts, sub_t = self._cluster([node], node.msb, absorb=False)
                luts += sub_luts
                child_time = max(child_time, sub_t)
                leaves.append(_Leaf(lsb, node.msb, negated=negated))
                return
            if isinstance(node, _Leaf) and node.tiled and not self.adder_trees:
                if lsb == node.lsb and width <= node.msb:
                    # read whole and never sign-extended: Yosys alumacc merges the tile
                    # sum of mul2dsp into this sum (it keeps it apart when the sum needs
                    # the product's sign above its top; observed with Yosys 0.70)
                    self._merge_tiles(node.tiled)
                    leaves.append(_Leaf(node.lsb, node.msb, node.tiles, negated=negated))
                    return
                node = _Leaf(lsb, node.msb, negated=negated)  # after its tile adders
            if isinstance(node, _Leaf):
                if lsb != node.lsb and len(node.rows) == 1:
                    node = replace(node, lsb=lsb, negated=negated, part=True)
                elif negated:
                    node = replace(node, negated=True)
                leaves.append(node)
            elif whole and _plain(node) and self._merges(node, min(node.msb, width), in_block):
                gather(node)  # a plain word (no bits passed around the adder): merges
            else:
                sub = min(node.msb, width)
                # a sum a block adds comes out of the block, not out of a carry chain
                late = not (self.merge_after_dsp and self._absorbs(node, sub))
                sub_luts, sub_t = self._tree_cost(node, sub, [], "")
                luts += sub_luts
                child_time = max(child_time, sub_t)
                leaves.append(_Leaf(lsb, node.msb, negated=negated, late=late))

        def gather(node):
            for args in _operands(node):
                operand(*args)

        # with a flow that splits sums into two-input adders before its DSP packing, an
        # addition a block takes keeps its two operands apart; the others merge again
        in_block = self.merge_after_dsp and not extra and self._absorbs(tree, width)
        if isinstance(tree, _Leaf):
            operand(tree, tree.lsb, True, tree.negated)
        else:
            gather(tree)
        if (
            self.adder_trees
            and self.p.multiplier.absorbs_post_adder
            and len(leaves) == 2
            and width <= max(self.p.multiplier.accumulator_bits, 1)
        ):
            # Yosys ice40_dsp and xilinx_dsp take an $add (not a subtraction) that reads
            # the product whole from its lowest bit, the product's only reader
            a, b = leaves
            dsp = [x for x, y in ((a, b), (b, a)) if self._block_adds(x, y.msb - y.lsb)]
            if any(leaf.negated for leaf in leaves):
                dsp = []
            if dsp:
                # the product's block adds the other word: no logic, the block's delay
                self._used_blocks.add(dsp[0].dsp)
                if root:
                    other = next(leaf for leaf in leaves if leaf is not dsp[0])
                    self.post_adds[root] = other.node
                    self.post_add_lsb[root] = dsp[0].lsb
                return luts, child_time + self.d.routing
        own, t = self._cluster(leaves, width, absorb=bool(root) and not self.adder_trees)
        if root and self._absorbed_here:
            self._absorbed_sums.add(root)
        return luts + own, child_time + t

    def _merges(self, node, width: int, parent_in_block: bool) -> bool:
        """Whether a plain word read whole joins the sum that reads it (one multi-operand
        sum). Without the split into two-input adders, always. With it (Yosys
        ``alumacc -macc-only; maccmap -unmap`` before DSP packing), the flow's later
        ``alumacc`` merges again the additions its DSP packing left: an addition a block
        takes (the word's or the reader's) stays apart (Yosys 0.70 synth_ice40 -dsp,
        observed 2026-12-03: a 7-operand ``$macc`` after ``ice40_dsp`` in the ``lp4``
        direct form I)."""
        if not self.adder_trees:
            return True
        if not self.merge_after_dsp or parent_in_block:
            return False
        return not self._absorbs(node, width)

    def _absorbs(self, node, width: int) -> bool:
        """Whether the flow's DSP packing takes two-input addition ``node`` (of a
        ``width``-column sum) into a block: the rule the end of ``_tree_cost`` applies
        (an addition, no subtraction, of a single-block product read whole and alone)."""
        if not isinstance(node, _Bin) or not self.p.multiplier.absorbs_post_adder:
            return False
        if width > max(self.p.multiplier.accumulator_bits, 1):
            return False
        ops = _operands(node)
        if any(neg or getattr(n, "negated", False) for n, _, _, neg in ops):
            return False
        for (n, lsb, _, _), (other, olsb, _, _) in zip(ops, ops[::-1]):
            if (
                isinstance(n, _Leaf)
                and (lsb == n.lsb or len(n.rows) != 1)
                and self._block_adds(n, other.msb - olsb)
            ):
                return True
        return False

    def _block_adds(self, leaf: _Leaf, other_bits: int) -> bool:
        """Whether the block of product ``leaf`` can add a word of ``other_bits`` to it:
        a single-block product read alone and whole, its block not yet adding, and on
        iCE40 ice40_dsp's width rule (``_block_takes``)."""
        return (
            bool(leaf.dsp)
            and leaf.alone
            and not leaf.part
            and leaf.dsp not in self._used_blocks
            and (not self.ice40_dsp or self._block_takes(leaf.dsp, other_bits))
        )

    def _cluster(self, leaves: list, width: int, *, absorb: bool) -> tuple[float, float]:
        """LUTs and delay of one multi-operand sum (a compressor tree and a carry adder).

        Two operands are one carry-chain adder over the columns from the higher operand's
        lowest bit up (below it one word passes through). Three or more follow Yosys
        ``maccmap``: every operand is sign-extended to the top; the bits of each column
        are dealt out to words (word ``k`` holds the ``k``-th bit of every column that
        has one); full adders take the words three at a time, over every column where
        at least two of the three have a bit (a column with two is a half adder, which
        costs as much), and leave a sum word and a carry word one column up, until two
        words remain for a carry-chain adder over the whole width. Constant bits (the
        ones of subtracted words) are left out: the tool folds them.
        """
        self._absorbed_here = False
        lsbs = [leaf.lsb + r for leaf in leaves for r in leaf.rows]
        if (
            absorb
            and self.p.multiplier.absorbs_post_adder
            and len(lsbs) >= 2
            and any(leaf.dsp for leaf in leaves)
        ):
            # one product and one other word are added inside the block
            dsp = next(leaf for leaf in leaves if leaf.dsp)
            lsbs.remove(dsp.lsb)
            self._absorbed_here = True
        d = self.d
        if len(lsbs) <= 1:
            if leaves and any(leaf.negated for leaf in leaves):
                bits = width - min(lsbs, default=0)
                self.chains += bits > 0
                return float(bits), d.routing + self.carry(bits)
            return 0.0, 0.0
        low = max(min(lsbs), 0)
        if len(lsbs) == 2:
            first = max(lsbs)
            if any(leaf.negated and leaf.lsb == min(lsbs) for leaf in leaves):
                first = low  # the low bits of a subtracted word need the carry chain
            final = max(width - first, 0)
            self.chains += final > 0
            return float(final), d.routing + self.carry(final)
        fa_columns, levels, _ = _compressor(lsbs, width)
        final = max(width - low, 0)
        self.chains += final > 0
        late = 0.0  # a column cost measured on the family's sums stands alone
        if self.p.full_adder_luts is None:
            late = sum(len(leaf.rows) for leaf in leaves if leaf.late) / len(lsbs)
        luts = self.fa_cost(levels) * fa_columns * (1 + LATE_OPERANDS * late) + final
        t = d.routing + levels * (d.lut + d.routing) + self.carry(final)
        return luts, t

    def _saturates(self, q) -> bool:
        """Whether quantizer ``q`` needs saturation logic (the hardware pass's rule)."""
        from .hdl.plan import can_overflow

        return q.overflow == "saturate" and can_overflow(self.g, q, self.ranges)

    def _dropped(self, q) -> int:
        """Fraction bits quantizer ``q`` rounds away (known-zero bits drop exactly)."""
        src = self.g[q.inputs[0]]
        k = src.format.frac - q.format.frac
        return k - min(self.zeros[src.name], k) if k > 0 else 0

    def _quantize(self, q):
        """Rounding adder (when not a carry into the sum before it) and saturation."""
        from .hdl.plan import rounded_range

        if self.rep[q.name] != q.name:
            return
        src = self.g[q.inputs[0]]
        k = self._dropped(q)
        sat = self._saturates(q)
        t = 0.0
        rlo, rhi = rounded_range(self.g, q, self.ranges)
        rbits = bits_for_range(rlo, rhi)
        if k > 0 and q.rounding != "floor":
            if q.rounding == "half-up":
                # an incrementer on the bits from k - 1 up (on a carry cell that makes
                # the sum bit itself, the bits need no LUT: the profile's free_increment)
                width = (rbits if sat else q.format.bits) + 1
                if self.p.free_increment:
                    width = 0
            else:
                # a word reaching down to bit 0 is added (the sign or the kept LSB
                # chooses it); with free increments only its low bits (a constant and
                # the carry in) need LUTs
                width = (rbits if sat else q.format.bits) + k
                if self.p.free_increment:
                    width = k
            width = min(width, src.format.bits + 1)
            self._add_luts("quantizers", width, chains=1)
            t += self.d.routing + self.carry(width or rbits)
        if sat:
            # two comparisons over the rounded word (one carry chain's worth) and one LUT
            # per output bit for the choice between the word and the two limits
            # (measured on Yosys 0.70 synth_ecp5 netlists, see docs/estimates.md)
            # one of the comparisons is a carry chain (Yosys 0.70 netlists)
            cmp = rbits
            if self.p.free_increment:
                # comparisons with constants on such a carry cell need LUTs only for
                # the bits above the word (probes on Yosys 0.70 synth_xilinx: about two
                # per bit; docs/estimates.md)
                cmp = 2 * max(rbits - q.format.bits, 0)
            self._add_luts("quantizers", cmp + q.format.bits, chains=1)
            t += self.d.routing + self.carry(rbits) + self.d.routing + self.d.lut
        self.times[q.name] = t
