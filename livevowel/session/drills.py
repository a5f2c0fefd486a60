"""Drills: blocks of trials from a YAML file, and the controller that runs them.

A drill file (shipped ones live in ``targets/drills/``) names a target set
and lists blocks; each block lists items (a prompt word or phrase and a
target id), how many repetitions, the order, the hold time and hit size,
an advance rule and, optionally, an adaptive rule::

    drill: front-pairs                 # id: letters, digits, '-', '_'
    title: FLEECE/KIT and DRESS/TRAP
    target_set: some-set-id            # a shipped set id or a path (relative to this file)
    pause_s: 1.0                       # self-paced: result shown this long before the next prompt
    defaults:                          # optional; every block key may be given here
      hit_size_sd: 1.5
    blocks:
      - id: fleece-kit
        items:
          - {prompt: beat, target: FLEECE}
          - {prompt: bit, target: KIT}
        repetitions: 5                 # each item this many times (block length = items x repetitions)
        order: contrast                # fixed | shuffled | contrast (alternate two targets)
        seed: 7                        # shuffled only; chosen and recorded when absent
        hold_s: 0.2                    # seconds the vowel must stay inside the target
        hit_size_sd: 1.5               # target region size, standard deviations
        advance: {hits: 8, in_last: 10}   # or {trials: 20}; default: the whole block
        adapt:                         # challenge-point rule (McAllister, Hitchcock & Ortiz 2020)
          every: 10                    # look at the last 10 trials ...
          harder_at: 0.8               # ... 80 % or more hits: harder
          easier_at: 0.5               # ... 50 % or less: easier
          change: [hit_size, hold]     # levers in order: hit_size, hold, item
          hit_size_factor: 0.8         # harder: size x 0.8, easier: size / 0.8
          hold_step_s: 0.1
          hit_size_range: [0.5, 3.0]
          hold_range: [0.0, 1.5]

Items may carry ``level: N`` (1 = easiest); with the ``item`` lever only the
items of the current level are prompted, and harder moves up a level.

The advance rule ``{hits: H, in_last: N}`` ends the block as soon as H of the
last N trials were hits (the accuracy goals clinicians set, common
practice); otherwise the block ends after its length (``max_trials`` sets
it). ``{trials: N}`` ends the block after N trials.

:class:`DrillRun` is the pure controller for both ways of running:
``self_paced`` (after an attempt the result shows for ``pause_s`` and the
next prompt follows by itself; call :meth:`DrillRun.tick` with the stream
time) and ``coach`` (the coach calls :meth:`DrillRun.next`,
:meth:`DrillRun.repeat`, :meth:`DrillRun.override`, :meth:`DrillRun.skip_block`).
Its events (block start/end, adaptive changes) are handed out by
:meth:`DrillRun.pop_events` for the record.
"""

from __future__ import annotations

import math
import re
from dataclasses import dataclass, field, replace
from pathlib import Path
from typing import Any, Iterator, Mapping

import numpy as np

from livevowel.errors import UserError

ORDERS = ("fixed", "shuffled", "contrast")
LEVERS = ("hit_size", "hold", "item")
MODES = ("self_paced", "coach")
_ID = re.compile(r"[A-Za-z0-9][A-Za-z0-9_.-]{0,63}")



def shipped_dir() -> Path:
    """Folder of the shipped drills: ``drills/`` in the target-set folder
    (:func:`livevowel.targets.targets_dir`, i.e. top-level ``targets/drills``)."""
    from livevowel.targets import targets_dir

    return targets_dir() / "drills"


@dataclass(frozen=True)
class Item:
    """One prompt: a word or phrase to say and the target id it aims at."""

    prompt: str
    target: str
    level: int = 1


@dataclass(frozen=True)
class AdvanceRule:
    """When a block ends: ``hits`` of the last ``in_last`` trials, or after ``trials``."""

    hits: int | None = None
    in_last: int | None = None
    trials: int | None = None

    def describe(self) -> str:
        if self.hits is not None:
            return f"{self.hits} hits in the last {self.in_last} trials"
        if self.trials is not None:
            return f"after {self.trials} trials"
        return "after the whole block"


@dataclass(frozen=True)
class AdaptRule:
    """The challenge-point rule: harder at ``harder_at`` or more, easier at ``easier_at`` or less."""

    every: int = 10
    harder_at: float = 0.8
    easier_at: float = 0.5
    change: tuple[str, ...] = ("hit_size",)
    hit_size_factor: float = 0.8
    hold_step_s: float = 0.1
    hit_size_range: tuple[float, float] = (0.5, 3.0)
    hold_range: tuple[float, float] = (0.0, 2.0)


@dataclass(frozen=True)
class Block:
    """One block of a drill (see the module docstring for the keys)."""

    id: str
    items: tuple[Item, ...]
    repetitions: int = 1
    order: str = "fixed"
    seed: int | None = None
    hold_s: float = 0.0
    hit_size_sd: float | None = None
    advance: AdvanceRule = AdvanceRule()
    max_trials: int | None = None
    adapt: AdaptRule | None = None
    title: str = ""

    @property
    def levels(self) -> tuple[int, ...]:
        return tuple(sorted({it.level for it in self.items}))

    def length(self) -> int:
        """Trials in the block unless the advance rule ends it early."""
        if self.advance.trials is not None:
            return self.advance.trials
        if self.max_trials is not None:
            return self.max_trials
        first = self.levels[0] if self.adapt is not None and "item" in self.adapt.change else None
        n = sum(1 for it in self.items if first is None or it.level == first)
        return self.repetitions * n


@dataclass(frozen=True)
class Drill:
    """A drill file, validated."""

    id: str
    title: str
    target_set: str
    blocks: tuple[Block, ...]
    pause_s: float = 1.0
    about: str = ""
    path: Path | None = None

    def target_ids(self) -> set[str]:
        return {it.target for b in self.blocks for it in b.items}


# ---------------------------------------------------------------------------
# Loading and validation
# ---------------------------------------------------------------------------

_DRILL_KEYS = {"drill", "title", "about", "target_set", "pause_s", "defaults", "blocks"}
_BLOCK_KEYS = {"id", "title", "items", "repetitions", "order", "seed", "hold_s", "hit_size_sd", "advance",
               "max_trials", "adapt"}
_ITEM_KEYS = {"prompt", "target", "level"}
_ADVANCE_KEYS = {"hits", "in_last", "trials"}
_ADAPT_KEYS = {"every", "harder_at", "easier_at", "change", "hit_size_factor", "hold_step_s", "hit_size_range",
               "hold_range"}


def _unknown(where: str, data: Mapping, known: set[str]) -> None:
    for k in data:
        if k not in known:
            raise UserError(f"{where}: unknown key {k!r} (known: {', '.join(sorted(known))})")


def _num(where: str, v: Any, *, lo: float | None = None, hi: float | None = None, integer: bool = False,
         lo_open: bool = False) -> float:
    if isinstance(v, bool) or not isinstance(v, (int, float)) or not math.isfinite(v):
        raise UserError(f"{where}: expected a number, got {v!r}")
    if integer and float(v) != int(v):
        raise UserError(f"{where}: expected a whole number, got {v!r}")
    if lo is not None and (v < lo or (lo_open and v == lo)):
        raise UserError(f"{where}: {v} is too small (must be {'above' if lo_open else 'at least'} {lo})")
    if hi is not None and v > hi:
        raise UserError(f"{where}: {v} is too large (at most {hi})")
    return int(v) if integer else float(v)


def _text(where: str, v: Any) -> str:
    if not isinstance(v, str) or not v.strip():
        raise UserError(f"{where}: expected text, got {v!r}")
    return v.strip()


def _range(where: str, v: Any, lo: float) -> tuple[float, float]:
    if not isinstance(v, (list, tuple)) or len(v) != 2:
        raise UserError(f"{where}: expected [low, high], got {v!r}")
    a = _num(where, v[0], lo=lo)
    b = _num(where, v[1], lo=lo)
    if a > b:
        raise UserError(f"{where}: low {a} is above high {b}")
    return a, b


def _parse_adapt(where: str, data: Any) -> AdaptRule:
    if not isinstance(data, Mapping):
        raise UserError(f"{where}: expected keys such as every, harder_at, easier_at, change")
    _unknown(where, data, _ADAPT_KEYS)
    d = AdaptRule()
    change = data.get("change", list(d.change))
    if isinstance(change, str):
        change = [change]
    if not isinstance(change, list) or not change:
        raise UserError(f"{where}.change: expected one of {', '.join(LEVERS)} or a list of them")
    for c in change:
        if c not in LEVERS:
            raise UserError(f"{where}.change: {c!r} is not one of {', '.join(LEVERS)}")
    rule = AdaptRule(
        every=_num(f"{where}.every", data.get("every", d.every), lo=1, integer=True),
        harder_at=_num(f"{where}.harder_at", data.get("harder_at", d.harder_at), lo=0, hi=1),
        easier_at=_num(f"{where}.easier_at", data.get("easier_at", d.easier_at), lo=0, hi=1),
        change=tuple(change),
        hit_size_factor=_num(f"{where}.hit_size_factor", data.get("hit_size_factor", d.hit_size_factor),
                             lo=0, hi=1, lo_open=True),
        hold_step_s=_num(f"{where}.hold_step_s", data.get("hold_step_s", d.hold_step_s), lo=0),
        hit_size_range=_range(f"{where}.hit_size_range", data.get("hit_size_range", list(d.hit_size_range)), 0.01),
        hold_range=_range(f"{where}.hold_range", data.get("hold_range", list(d.hold_range)), 0),
    )
    if rule.easier_at >= rule.harder_at:
        raise UserError(f"{where}: easier_at ({rule.easier_at}) must be below harder_at ({rule.harder_at})")
    if rule.hit_size_factor == 1 and "hit_size" in rule.change:
        raise UserError(f"{where}.hit_size_factor: 1 would never change the hit size; use e.g. 0.8")
    return rule


def _parse_block(where: str, data: Any, defaults: Mapping, index: int) -> Block:
    if not isinstance(data, Mapping):
        raise UserError(f"{where}: expected keys such as id, items, repetitions, order")
    _unknown(where, data, _BLOCK_KEYS)
    merged = {**defaults, **data}
    bid = merged.get("id", f"block{index + 1}")
    if not isinstance(bid, str) or not _ID.fullmatch(bid):
        raise UserError(f"{where}.id: {bid!r} must be letters, digits, '-', '_' or '.'")
    where = f"{where} ({bid})"
    items_raw = merged.get("items")
    if not isinstance(items_raw, list) or not items_raw:
        raise UserError(f"{where}.items: expected a list of {{prompt: WORD, target: ID}}")
    items = []
    for j, it in enumerate(items_raw):
        iw = f"{where} item {j + 1}"
        if not isinstance(it, Mapping):
            raise UserError(f"{iw}: expected {{prompt: WORD, target: ID}}, got {it!r}")
        _unknown(iw, it, _ITEM_KEYS)
        for k in ("prompt", "target"):
            if k not in it:
                raise UserError(f"{iw}: the key {k!r} is missing")
        items.append(Item(prompt=_text(f"{iw}.prompt", it["prompt"]), target=_text(f"{iw}.target", it["target"]),
                          level=_num(f"{iw}.level", it.get("level", 1), lo=1, integer=True)))
    order = merged.get("order", "fixed")
    if order not in ORDERS:
        raise UserError(f"{where}.order: {order!r} is not one of {', '.join(ORDERS)}")
    if order == "contrast":
        targets = list(dict.fromkeys(it.target for it in items))
        if len(targets) != 2:
            raise UserError(f"{where}.order: contrast alternates two targets, but the items aim at "
                            f"{len(targets)} ({', '.join(targets)})")
    seed = merged.get("seed")
    if seed is not None:
        seed = _num(f"{where}.seed", seed, lo=0, integer=True)
        if order != "shuffled":
            raise UserError(f"{where}.seed: only a shuffled block uses a seed (order is {order})")
    hit = merged.get("hit_size_sd")
    if hit is not None:
        hit = _num(f"{where}.hit_size_sd", hit, lo=0, lo_open=True, hi=10)
    adv_raw = merged.get("advance")
    advance = AdvanceRule()
    if adv_raw is not None:
        aw = f"{where}.advance"
        if not isinstance(adv_raw, Mapping):
            raise UserError(f"{aw}: expected {{hits: H, in_last: N}} or {{trials: N}}")
        _unknown(aw, adv_raw, _ADVANCE_KEYS)
        if "trials" in adv_raw:
            if "hits" in adv_raw or "in_last" in adv_raw:
                raise UserError(f"{aw}: give either trials or hits with in_last, not both")
            advance = AdvanceRule(trials=_num(f"{aw}.trials", adv_raw["trials"], lo=1, integer=True))
        elif "hits" in adv_raw:
            if "in_last" not in adv_raw:
                raise UserError(f"{aw}: hits needs in_last (e.g. hits: 8, in_last: 10)")
            h = _num(f"{aw}.hits", adv_raw["hits"], lo=1, integer=True)
            n = _num(f"{aw}.in_last", adv_raw["in_last"], lo=1, integer=True)
            if h > n:
                raise UserError(f"{aw}: hits ({h}) cannot exceed in_last ({n})")
            advance = AdvanceRule(hits=h, in_last=n)
        else:
            raise UserError(f"{aw}: expected {{hits: H, in_last: N}} or {{trials: N}}")
    adapt = _parse_adapt(f"{where}.adapt", merged["adapt"]) if merged.get("adapt") is not None else None
    if adapt is not None and "item" in adapt.change and len({it.level for it in items}) < 2:
        raise UserError(f"{where}.adapt.change: 'item' needs items of at least two levels (level: 1, 2, ...)")
    max_trials = merged.get("max_trials")
    if max_trials is not None:
        max_trials = _num(f"{where}.max_trials", max_trials, lo=1, integer=True)
    title = merged.get("title", "")
    return Block(
        id=bid,
        title=_text(f"{where}.title", title) if title else "",
        items=tuple(items),
        repetitions=_num(f"{where}.repetitions", merged.get("repetitions", 1), lo=1, hi=1000, integer=True),
        order=order,
        seed=seed,
        hold_s=_num(f"{where}.hold_s", merged.get("hold_s", 0.0), lo=0, hi=10),
        hit_size_sd=hit,
        advance=advance,
        max_trials=max_trials,
        adapt=adapt,
    )


def parse_drill(data: Any, *, source: str, path: Path | None = None) -> Drill:
    """Validate a drill mapping (as read from YAML); ``source`` names it in messages."""
    if not isinstance(data, Mapping):
        raise UserError(f"{source}: expected a drill (keys drill, target_set, blocks)")
    _unknown(source, data, _DRILL_KEYS)
    for k in ("drill", "target_set", "blocks"):
        if k not in data:
            raise UserError(f"{source}: the key {k!r} is missing")
    did = data["drill"]
    if not isinstance(did, str) or not _ID.fullmatch(did):
        raise UserError(f"{source}: drill: {did!r} must be letters, digits, '-', '_' or '.'")
    defaults = data.get("defaults") or {}
    if not isinstance(defaults, Mapping):
        raise UserError(f"{source}: defaults: expected block keys such as hit_size_sd, hold_s")
    _unknown(f"{source}: defaults", defaults, _BLOCK_KEYS - {"id", "title"})
    blocks_raw = data["blocks"]
    if not isinstance(blocks_raw, list) or not blocks_raw:
        raise UserError(f"{source}: blocks: expected a list of blocks")
    blocks = tuple(_parse_block(f"{source}: block {i + 1}", b, defaults, i) for i, b in enumerate(blocks_raw))
    ids = [b.id for b in blocks]
    dup = {i for i in ids if ids.count(i) > 1}
    if dup:
        raise UserError(f"{source}: block id {sorted(dup)[0]!r} is used twice; give each block its own id")
    return Drill(
        id=did,
        title=_text(f"{source}: title", data.get("title", did)),
        target_set=_text(f"{source}: target_set", data["target_set"]),
        blocks=blocks,
        pause_s=_num(f"{source}: pause_s", data.get("pause_s", 1.0), lo=0, hi=30),
        about=str(data.get("about", "") or "").strip(),
        path=path,
    )


def load_drill(path_or_name: "str | Path") -> Drill:
    """Read and validate a drill file, or a shipped drill by id."""
    import yaml

    p = Path(path_or_name)
    if not p.exists() and not p.suffix:
        cand = shipped_dir() / f"{path_or_name}.yaml"
        if cand.exists():
            p = cand
    if not p.exists():
        known = ", ".join(shipped_drills()) or "none"
        raise UserError(f"{path_or_name}: no such drill file (shipped drills: {known})")
    try:
        text = p.read_text(encoding="utf-8")
    except OSError as exc:
        raise UserError(f"{p}: cannot read the drill file ({exc.strerror})") from None
    try:
        data = yaml.safe_load(text)
    except yaml.YAMLError as exc:
        mark = getattr(exc, "problem_mark", None)
        line = f" line {mark.line + 1}" if mark is not None else ""
        raise UserError(f"{p}:{line} is not valid YAML; fix the drill file") from None
    return parse_drill(data, source=str(p), path=p)


def shipped_drills() -> list[str]:
    """Ids (file stems) of the drills shipped in ``targets/drills``."""
    folder = shipped_dir()
    if not folder.is_dir():
        return []
    return sorted(p.stem for p in folder.glob("*.yaml"))


def check_targets(drill: Drill, target_set) -> None:
    """Raise UserError naming file, block and item for a target id not in ``target_set``.

    ``target_set`` is a :class:`livevowel.targets.TargetSet`; an item's
    target may be the id, the IPA symbol or the lexical-set keyword
    (``TargetSet.find``).
    """
    known = [t.id for t in target_set.targets]
    src = str(drill.path) if drill.path else drill.id
    find = getattr(target_set, "find", None)
    for bi, b in enumerate(drill.blocks):
        for ii, it in enumerate(b.items):
            found = find(it.target) if find is not None else (it.target if it.target in known else None)
            if found is None:
                raise UserError(f"{src}: block {bi + 1} ({b.id}) item {ii + 1}: target {it.target!r} is not in "
                                f"set {getattr(target_set, 'id', '?')!r} (known: {', '.join(known)})")


def resolve_target_set_ref(drill: Drill) -> str:
    """The drill's ``target_set`` as a loadable reference (paths relative to the drill file)."""
    ref = drill.target_set
    if drill.path is not None and (ref.endswith((".yaml", ".yml")) or "/" in ref):
        cand = (drill.path.parent / ref)
        if cand.exists():
            return str(cand)
    return ref


# ---------------------------------------------------------------------------
# The controller
# ---------------------------------------------------------------------------

@dataclass(frozen=True)
class Prompt:
    """What the speaker is asked to say now, and the task it is held to."""

    block_index: int
    block_id: str
    trial: int               # 1-based number this trial will get in the block
    item: Item
    hit_size_sd: float | None
    hold_s: float
    shown_at_s: float        # stream time the prompt appeared

    @property
    def target(self) -> str:
        return self.item.target


@dataclass
class TrialResult:
    """One counted trial (kept per block; overrides change ``hit``)."""

    trial: int
    target: str
    auto_hit: bool
    hit: bool
    counted: bool = True


@dataclass
class _BlockState:
    index: int
    block: Block
    seed: int | None
    rng: np.random.Generator | None
    hit_size_sd: float | None
    hold_s: float
    level: int
    results: list[TrialResult] = field(default_factory=list)
    since_adapt: int = 0
    round: list[Item] = field(default_factory=list)
    criterion_met: bool = False

    def counted(self) -> list[TrialResult]:
        return [r for r in self.results if r.counted]


class DrillRun:
    """Trial-by-trial controller of a drill (pure: times are passed in).

    Parameters
    ----------
    drill : Drill
    mode : str, keyword-only
        ``"self_paced"`` or ``"coach"``.
    pause_s : float, optional, keyword-only
        Self-paced pause after each result (default: the drill's).
    default_hit_size_sd : float, optional, keyword-only
        Hit size for blocks that do not give one (the target set's default).
    seed : int, optional, keyword-only
        Seed for blocks shuffled without a seed of their own (default: fresh
        entropy). The seeds used are in :attr:`seeds`, for the record.
    start_s : float, keyword-only
        Stream time of the first prompt.

    States: ``"prompt"`` (waiting for an attempt), ``"result"`` (showing the
    last result), ``"done"``.
    """

    def __init__(self, drill: Drill, *, mode: str = "self_paced", pause_s: float | None = None,
                 default_hit_size_sd: float | None = None, seed: int | None = None, start_s: float = 0.0) -> None:
        if mode not in MODES:
            raise UserError(f"mode {mode!r} is not one of {', '.join(MODES)}")
        self.drill = drill
        self.mode = mode
        self.pause_s = drill.pause_s if pause_s is None else float(pause_s)
        self.default_hit_size_sd = default_hit_size_sd
        self._seed_source = np.random.default_rng(seed)
        self.seeds: dict[str, int] = {}
        self._events: list[dict] = []
        self.state = "prompt"
        self.prompt: Prompt | None = None
        self._result_at: float | None = None
        self._block_no = -1
        self.block_states: list[_BlockState] = []
        self._next_trial = 1
        self._start_block(0, start_s)

    # -- block and item bookkeeping ------------------------------------------------
    @property
    def block(self) -> _BlockState:
        return self.block_states[-1]

    def _start_block(self, index: int, now_s: float) -> None:
        if index >= len(self.drill.blocks):
            self.state = "done"
            self.prompt = None
            self._events.append({"kind": "drill_end", "stream_s": now_s, "block_index": None, "detail": {}})
            return
        b = self.drill.blocks[index]
        seed = rng = None
        if b.order == "shuffled":
            seed = b.seed if b.seed is not None else int(self._seed_source.integers(0, 2**31 - 1))
            rng = np.random.default_rng(seed)
            self.seeds[b.id] = seed
        hit = b.hit_size_sd if b.hit_size_sd is not None else self.default_hit_size_sd
        st = _BlockState(index, b, seed, rng, hit, b.hold_s, b.levels[0])
        self.block_states.append(st)
        self._next_trial = 1
        self._events.append({"kind": "block_start", "stream_s": now_s, "block_index": index,
                             "detail": {"block_id": b.id, "seed": seed, "hit_size_sd": hit, "hold_s": b.hold_s,
                                        "order": b.order, "advance": b.advance.describe(), "length": b.length()}})
        self._new_prompt(now_s)

    def _active_items(self, st: _BlockState) -> list[Item]:
        b = st.block
        if b.adapt is not None and "item" in b.adapt.change:
            return [it for it in b.items if it.level == st.level]
        return list(b.items)

    def _make_round(self, st: _BlockState) -> list[Item]:
        items = self._active_items(st)
        if st.block.order == "shuffled":
            return [items[i] for i in st.rng.permutation(len(items))]
        if st.block.order == "contrast":
            targets = list(dict.fromkeys(it.target for it in st.block.items))
            a = [it for it in items if it.target == targets[0]]
            b = [it for it in items if it.target == targets[1]]
            if not a or not b:
                return items
            n = max(len(a), len(b))
            out = []
            for k in range(n):
                out += [a[k % len(a)], b[k % len(b)]]
            return out
        return items

    def _take_item(self, st: _BlockState) -> Item:
        if not st.round:
            st.round = self._make_round(st)
        return st.round.pop(0)

    def _new_prompt(self, now_s: float, *, same_item: bool = False) -> None:
        st = self.block
        item = self.prompt.item if same_item and self.prompt is not None else self._take_item(st)
        self.prompt = Prompt(st.index, st.block.id, self._next_trial, item, st.hit_size_sd, st.hold_s, now_s)
        self.state = "prompt"
        self._result_at = None

    # -- rules ---------------------------------------------------------------------
    def _block_over(self, st: _BlockState) -> bool:
        b = st.block
        c = st.counted()
        if b.advance.hits is not None:
            last = c[-b.advance.in_last:]
            if sum(r.hit for r in last) >= b.advance.hits:
                st.criterion_met = True
                return True
        else:
            st.criterion_met = len(c) >= b.length()
        return len(c) >= b.length()

    def _maybe_adapt(self, st: _BlockState, now_s: float) -> None:
        rule = st.block.adapt
        if rule is None or st.since_adapt < rule.every:
            return
        window = st.counted()[-rule.every:]
        acc = sum(r.hit for r in window) / len(window)
        st.since_adapt = 0
        if acc >= rule.harder_at:
            direction = "harder"
        elif acc <= rule.easier_at:
            direction = "easier"
        else:
            self._events.append({"kind": "adapt", "stream_s": now_s, "block_index": st.index,
                                 "detail": {"direction": "same", "accuracy": acc}})
            return
        levers = rule.change if direction == "harder" else tuple(reversed(rule.change))
        for lever in levers:
            before, after = self._apply(st, rule, lever, direction)
            if before != after:
                self._events.append({"kind": "adapt", "stream_s": now_s, "block_index": st.index,
                                     "detail": {"direction": direction, "lever": lever, "from": before,
                                                "to": after, "accuracy": acc}})
                return
        self._events.append({"kind": "adapt", "stream_s": now_s, "block_index": st.index,
                             "detail": {"direction": direction, "lever": None, "accuracy": acc,
                                        "reason": "every lever at its limit"}})

    @staticmethod
    def _apply(st: _BlockState, rule: AdaptRule, lever: str, direction: str):
        harder = direction == "harder"
        if lever == "hit_size":
            if st.hit_size_sd is None:
                return None, None
            lo, hi = rule.hit_size_range
            before = st.hit_size_sd
            new = before * rule.hit_size_factor if harder else before / rule.hit_size_factor
            st.hit_size_sd = round(min(hi, max(lo, new)), 6)
            return before, st.hit_size_sd
        if lever == "hold":
            lo, hi = rule.hold_range
            before = st.hold_s
            new = before + rule.hold_step_s if harder else before - rule.hold_step_s
            st.hold_s = round(min(hi, max(lo, new)), 6)
            return before, st.hold_s
        levels = st.block.levels
        k = levels.index(st.level)
        k = min(len(levels) - 1, k + 1) if harder else max(0, k - 1)
        before = st.level
        st.level = levels[k]
        if st.level != before:
            st.round = []
        return before, st.level

    # -- inputs --------------------------------------------------------------------
    def accepts(self, attempt_start_s: float) -> bool:
        """Would an attempt that started at this stream time count for the prompt?

        Self-paced: only attempts that started after the prompt appeared.
        Coach-led: any attempt while the drill runs (the coach decides).
        """
        if self.state == "done" or self.prompt is None:
            return False
        if self.mode == "coach":
            return True
        return self.state == "prompt" and attempt_start_s >= self.prompt.shown_at_s - 1e-9

    def attempt(self, hit: bool | None, *, now_s: float) -> TrialResult | None:
        """Register the judgement of an attempt for the current prompt.

        ``hit=None`` (a flagged attempt, not judged) counts for nothing and
        leaves the prompt as it is. Returns the trial, or ``None``.
        """
        if self.state == "done" or self.prompt is None:
            return None
        if hit is None:
            return None
        st = self.block
        res = TrialResult(self._next_trial, self.prompt.target, bool(hit), bool(hit))
        st.results.append(res)
        st.since_adapt += 1
        self._next_trial += 1
        self._maybe_adapt(st, now_s)
        self.state = "result"
        self._result_at = now_s
        if self.mode == "coach":
            # the same prompt stays up; a further attempt is a further trial of it
            self.prompt = replace(self.prompt, trial=self._next_trial, hit_size_sd=st.hit_size_sd, hold_s=st.hold_s)
        return res

    def tick(self, now_s: float) -> None:
        """Self-paced: move on once the result has shown for ``pause_s``."""
        if self.mode == "self_paced" and self.state == "result" and now_s - self._result_at >= self.pause_s - 1e-9:
            self._advance(now_s)

    def settle(self, now_s: float) -> None:
        """The input ended: a self-paced result showing after the drill's last trial ends the
        drill, as the end of its pause would have (the drill is finished, not cut short)."""
        if (self.mode == "self_paced" and self.state == "result"
                and self.block.index == len(self.drill.blocks) - 1 and self._block_over(self.block)):
            self._advance(now_s)

    def next(self, now_s: float) -> None:
        """Coach: go to the next prompt (or block, when the advance rule is met)."""
        if self.state != "done":
            self._advance(now_s)

    def repeat(self, now_s: float) -> None:
        """Coach: ask for the same item again (a new trial of it)."""
        if self.state != "done":
            st = self.block
            self.prompt = replace(self.prompt, trial=self._next_trial, hit_size_sd=st.hit_size_sd,
                                  hold_s=st.hold_s, shown_at_s=now_s)
            self.state = "prompt"

    def skip_block(self, now_s: float) -> None:
        """Coach: end the current block now."""
        if self.state != "done":
            self._end_block(now_s, skipped=True)

    def override(self, block_index: int, trial: int, *, hit: "bool | None | object" = ...,
                 counted: bool | None = None) -> None:
        """Coach: change the judgement that counts for a trial.

        ``hit`` True/False overrides, ``None`` restores the automatic result,
        left out keeps it; ``counted=False`` takes the trial out of the counts.
        Rules already applied (adaptive changes) are not undone.
        """
        st = self.block_states[block_index]
        for r in st.results:
            if r.trial == trial:
                if hit is not ...:
                    r.hit = r.auto_hit if hit is None else bool(hit)
                if counted is not None:
                    r.counted = bool(counted)
                return
        raise UserError(f"block {block_index + 1} has no trial {trial}")

    def _advance(self, now_s: float) -> None:
        st = self.block
        if self._block_over(st):
            self._end_block(now_s, skipped=False)
        else:
            self._new_prompt(now_s)

    def _end_block(self, now_s: float, *, skipped: bool) -> None:
        st = self.block
        if not skipped:
            self._block_over(st)
        c = st.counted()
        self._events.append({"kind": "block_end", "stream_s": now_s, "block_index": st.index,
                             "detail": {"block_id": st.block.id, "trials": len(c), "hits": sum(r.hit for r in c),
                                        "criterion_met": st.criterion_met, "skipped": skipped,
                                        "hit_size_sd": st.hit_size_sd, "hold_s": st.hold_s}})
        self._start_block(st.index + 1, now_s)

    def pop_events(self) -> list[dict]:
        """Events since the last call: dicts with kind, stream_s, block_index, detail."""
        ev, self._events = self._events, []
        return ev

    @property
    def done(self) -> bool:
        return self.state == "done"


def iter_sequence(drill: Drill, *, seed: int | None = None) -> Iterator[tuple[int, Item]]:
    """The prompts a run would give if every trial counted and no rule fired early (for previews)."""
    run = DrillRun(drill, seed=seed)
    t = 0.0
    while not run.done:
        yield run.prompt.block_index, run.prompt.item
        run.attempt(False, now_s=t)
        t += run.pause_s + 1.0
        run.tick(t)
