"""Candidate designs: alternative parts per slot and varied parameters, as one variant axis.

A :class:`Variants` is the full factorial of a parts file (alternatives per slot: ``switch``,
``rectifier``, ``inductor``, ``capacitor.<name>``) and of ``vary`` (a key path of the design
and its values, e.g. ``{"operating.fsw": [...], "inductor.l": [...]}``) over one base design.
It sits between ``design`` and ``solver``: it holds no physics, only which part and which value
each variant takes, as integer index arrays per slot and value arrays per key, so a variant
count of ten thousand costs a few arrays and never ten thousand design objects.

The solver turns a ``Variants`` into one stacked design whose part fields are arrays along the
variant axis (:func:`stack_parts`): every numeric field that differs between the alternatives
of a slot becomes an array over the variants; fields that are equal stay scalars. Parts whose
optional data differ in kind (one switch given by ``eoss``, another by ``qoss``; curves with a
different number of datasheet points) cannot share one array layout; they form *structure
groups* (:meth:`Variants.groups`), each one vectorised solve over all its variants.

Parts file (TOML, our own format; every number with a unit string as in the design file)::

    [[switch]]
    name = "trench 60 V, 6 mohm"   # the alternative's label
    cost = 0.42                    # any currency, the same for all parts (optional)
    area = "30 mm2"                # board area (optional)
    ...                            # the keys of the design file's [switch] section

    [[capacitor.cout]]             # alternatives for the design's bank named "cout"
    name = "..."
    ...                            # the [[capacitor]] keys (name and position from the bank)

Each alternative replaces the design's whole section; it is validated by the design file's
own rules, every problem of the file reported in one pass (file, key path, expected).
"""

from __future__ import annotations

import dataclasses
import os
from dataclasses import dataclass
from pathlib import Path
from typing import Any

import numpy as np

from lossbudget import design as dmod
from lossbudget.design import Curve, Design, Range, Value, load_design, read_toml_file
from lossbudget.errors import DesignError
from lossbudget.units import format_quantity, glossary_dimension, parse_quantity

DEFAULT_BUDGET = 10_000
SLOTS = ("switch", "rectifier", "inductor")
PART_EXTRA = ("name", "cost", "area")
# fields that change the structure of the computation (not mere factors): equal within a group
STRUCTURAL = frozenset({"layers", "c_bias", "includes", "l_at_i", "l_points"})
# fields the engine only records (the datasheet's test conditions): never split a group
RECORDED = frozenset({"rds_on_v_gs"})


@dataclass(frozen=True, slots=True, kw_only=True)
class Alternative:
    """One candidate part for a slot: its parsed section, name, cost and board area."""

    name: str
    part: Any
    cost: float = float("nan")
    area: float = float("nan")


@dataclass(frozen=True, slots=True, kw_only=True, eq=False)
class Variants:
    """The full factorial of part alternatives and varied values over a base design.

    ``slots`` maps a slot (``switch``, ``rectifier``, ``inductor``, ``capacitor.<name>``) to its
    alternatives; ``index`` maps the same slot to an integer array over the variants (which
    alternative each takes). ``values`` maps a varied key path to its value per variant (SI).
    Variants run slot by slot, then key by key, the last one fastest.
    """

    base: Design
    slots: dict[str, tuple[Alternative, ...]]
    index: dict[str, np.ndarray]
    values: dict[str, np.ndarray]
    source: str = "<dict>"
    shape: tuple[int, ...] = ()

    def __len__(self) -> int:
        return int(self.size)

    @property
    def size(self) -> int:
        """Number of variants."""
        for arr in (*self.index.values(), *self.values.values()):
            return int(arr.size)
        return 1

    @property
    def labels(self) -> np.ndarray:
        """A label per variant: the part names and the varied values."""
        return self.labels_without()

    def labels_without(self, *keys: str) -> np.ndarray:
        """Labels leaving out some slots or varied keys (a candidate across a sweep)."""
        n = self.size
        out = np.full(n, "", dtype=object)
        pieces = []
        for slot, alts in self.slots.items():
            if slot in keys:
                continue
            names = np.array([a.name for a in alts], dtype=object)
            pieces.append(names[self.index[slot]])
        for key, vals in self.values.items():
            if key in keys:
                continue
            dim = glossary_dimension(_glossary_key(key))
            uniq, inv = np.unique(vals, return_inverse=True)
            text = np.array(
                [f"{key.split('.')[-1]}={format_quantity(float(u), dim)}" for u in uniq],
                dtype=object,
            )
            pieces.append(text[inv])
        for k, p in enumerate(pieces):
            out = p if k == 0 else out + " / " + p
        if not pieces:
            out = np.full(n, self.base.name, dtype=object)
        return out

    def _part_figure(self, field: str) -> np.ndarray:
        total = np.zeros(self.size)
        given = np.zeros(self.size, dtype=bool)
        for slot, alts in self.slots.items():
            fig = np.array([getattr(a, field) for a in alts], dtype=float)[self.index[slot]]
            total = total + np.nan_to_num(fig)
            given |= np.isfinite(fig)
        return np.where(given, total, np.nan)

    @property
    def cost(self) -> np.ndarray:
        """Sum of the chosen parts' costs per variant (NaN where no part gives one)."""
        return self._part_figure("cost")

    @property
    def area(self) -> np.ndarray:
        """Sum of the chosen parts' board areas per variant (NaN where none gives one). [m2]"""
        return self._part_figure("area")

    def choice(self, slot: str) -> np.ndarray:
        """The alternative's name per variant for a slot."""
        names = np.array([a.name for a in self.slots[slot]], dtype=object)
        return names[self.index[slot]]

    def design(self, i: int) -> Design:
        """Variant ``i`` as a design of its own (for inspection and for checks)."""
        d = self.base
        for slot, alts in self.slots.items():
            d = _replace_slot(d, slot, alts[int(self.index[slot][i])].part)
        for key, vals in self.values.items():
            d = _set_key(d, key, float(vals[i]))
        return d

    def groups(self) -> list[np.ndarray]:
        """Variants whose parts share one array layout: each group is one vectorised solve."""
        if not self.slots:
            return [np.arange(self.size)]
        codes = []
        for slot, alts in self.slots.items():
            keys = [structure_key(a.part) for a in alts]
            uniq = {k: j for j, k in enumerate(dict.fromkeys(keys))}
            codes.append(np.array([uniq[k] for k in keys])[self.index[slot]])
        combined = np.stack(codes, axis=1)
        _, inverse = np.unique(combined, axis=0, return_inverse=True)
        inverse = np.asarray(inverse).ravel()
        return [np.flatnonzero(inverse == g) for g in range(int(inverse.max()) + 1)]


# --------------------------------------------------------------------------------------------
# building the factorial
# --------------------------------------------------------------------------------------------


def variants(
    design: Design | str | os.PathLike | dict,
    *,
    parts=None,
    vary: dict[str, Any] | None = None,
    budget: int = DEFAULT_BUDGET,
) -> Variants:
    """The full factorial of part alternatives and varied values over a design.

    Parameters
    ----------
    design : Design, path or dict
        The base design (its sections stand where the parts file gives no alternatives).
    parts : path or dict, optional
        A parts file (TOML) or a dict of the same shape: alternatives per slot.
    vary : dict, optional
        Key path → values (numbers in SI or strings with units), e.g.
        ``{"operating.fsw": ["200 kHz", "300 kHz"], "inductor.l": [22e-6, 33e-6]}``.
    budget : int
        Largest number of variants accepted; above it the call refuses with the count.

    Raises
    ------
    DesignError
        A bad parts file or vary entry (every problem, one line each), or a factorial larger
        than ``budget``.
    """
    base = design if isinstance(design, Design) else load_design(design)
    slots: dict[str, tuple[Alternative, ...]] = {}
    source = "<dict>"
    if parts is not None:
        source, slots = read_parts(base, parts)
    values: dict[str, np.ndarray] = {}
    problems: list[str] = []
    for key, raw in (vary or {}).items():
        got = _vary_values(base, key, raw, problems)
        if got is not None:
            values[key] = got
    if problems:
        raise DesignError(problems)
    sizes = [len(a) for a in slots.values()] + [v.size for v in values.values()]
    count = int(np.prod(sizes, dtype=np.int64)) if sizes else 1
    if count > budget:
        detail = " × ".join(
            [f"{len(a)} {s}" for s, a in slots.items()]
            + [f"{v.size} {k}" for k, v in values.items()]
        )
        raise DesignError(
            f"variants: the factorial holds {count:,} variants ({detail}), more than the "
            f"budget of {budget:,}; give fewer alternatives or values, or raise the budget"
        )
    grids = np.meshgrid(*[np.arange(s) for s in sizes], indexing="ij") if sizes else []
    flat = [g.ravel() for g in grids]
    index = {slot: flat[k] for k, slot in enumerate(slots)}
    vals = {key: values[key][flat[len(slots) + k]] for k, key in enumerate(values)}
    return Variants(base=base, slots=slots, index=index, values=vals, source=source,
                    shape=tuple(sizes))


def read_parts(base: Design, parts) -> tuple[str, dict[str, tuple[Alternative, ...]]]:
    """Parse and validate a parts file against a base design: (source name, slots)."""
    if isinstance(parts, dict):
        name, raw = "<dict>", parts
    elif isinstance(parts, str | os.PathLike):
        name = Path(parts).name
        raw, _, _ = read_toml_file(parts, what="parts file")
    else:
        raise DesignError(
            f"<{type(parts).__name__}>: expected a path to a TOML parts file or a dict"
        )
    problems: list[str] = []
    slots: dict[str, tuple[Alternative, ...]] = {}
    banks = {c.name: c for c in base.capacitors}
    sinks = {s.name for s in base.sinks}
    for top, entry in raw.items():
        if top in SLOTS:
            got = _slot(name, base, top, top, entry, problems, sinks)
            if got:
                slots[top] = got
        elif top == "capacitor":
            if not isinstance(entry, dict):
                problems.append(
                    f"{name}: capacitor: expected tables [[capacitor.<bank name>]], got "
                    f"{dmod._show(entry)}"
                )
                continue
            for bank, alts in entry.items():
                if bank not in banks:
                    problems.append(
                        f"{name}: capacitor.{bank}: no bank of that name in the design; "
                        f"banks: {', '.join(banks) or 'none'}"
                    )
                    continue
                got = _slot(name, base, f"capacitor.{bank}", "capacitor", alts, problems, sinks)
                if got:
                    slots[f"capacitor.{bank}"] = got
        else:
            problems.append(
                f"{name}: {top}: unknown slot; valid slots: switch, rectifier, inductor, "
                "capacitor.<bank name>"
            )
    if problems:
        raise DesignError(problems)
    if not slots:
        raise DesignError(f"{name}: expected at least one slot with alternatives ([[switch]], ...)")
    return name, slots


def _slot(source, base, slot, kind, entry, problems, sinks) -> tuple[Alternative, ...]:
    if not isinstance(entry, list) or not entry or not all(isinstance(e, dict) for e in entry):
        problems.append(f"{source}: {slot}: expected an array of tables ([[{slot}]])")
        return ()
    out = []
    seen: set[str] = set()
    for k, raw in enumerate(entry):
        here = f"{slot}[{k}]"
        body = {key: v for key, v in raw.items() if key not in PART_EXTRA}
        label = raw.get("name", f"{slot} {k + 1}")
        if not isinstance(label, str) or not label.strip():
            problems.append(f"{source}: {here}.name: expected a non-empty text, got {label!r}")
            continue
        if label in seen:
            problems.append(f"{source}: {here}.name: expected distinct names; repeated {label!r}")
        seen.add(label)
        cost = _plain_number(raw, "cost", source, here, problems)
        area = float("nan")
        if "area" in raw:
            try:
                area = parse_quantity(raw["area"], "area", where=f"{source}: {here}.area")
            except DesignError as exc:
                problems.extend(exc.problems)
        part = _parse_section(source, base, kind, slot, here, body, problems)
        if part is None:
            continue
        th = getattr(part, "thermal", None)
        if th is not None and th.sink is not None and th.sink not in sinks:
            problems.append(
                f"{source}: {here}.thermal.sink: no sink {th.sink!r} in the design; sinks: "
                f"{', '.join(sorted(sinks)) or 'none'}"
            )
            continue
        out.append(Alternative(name=label, part=part, cost=cost, area=area))
    return tuple(out)


def _plain_number(raw, key, source, here, problems) -> float:
    if key not in raw:
        return float("nan")
    v = raw[key]
    if isinstance(v, bool) or not isinstance(v, int | float) or not np.isfinite(v) or v < 0:
        problems.append(f"{source}: {here}.{key}: expected a number >= 0, got {dmod._show(v)}")
        return float("nan")
    return float(v)


def _parse_section(source, base: Design, kind, slot, here, body, problems):
    """Parse one alternative with the design file's own section reader."""
    rd = dmod._Reader(source)
    iout = base.operating.iout_rated
    if kind == "switch":
        part = dmod._mosfet(rd, body, "switch", sync=False, iout=iout)
        inner = "switch"
    elif kind == "rectifier":
        if base.rectifier_kind == "sync":
            part = dmod._mosfet(rd, body, "rectifier", sync=True, iout=iout)
        else:
            part = dmod._diode(rd, body, "rectifier", iout=iout)
        inner = "rectifier"
    elif kind == "inductor":
        part = dmod._inductor(rd, body)
        inner = "inductor"
    else:
        bank = next(c for c in base.capacitors if f"capacitor.{c.name}" == slot)
        body = {**body, "name": bank.name, "position": bank.position}
        part = dmod._capacitor(rd, body, "capacitor[0]")
        inner = "capacitor[0]"
    for msg in rd.problems:
        head = f"{source}: {inner}"
        problems.append(f"{source}: {here}{msg[len(head):]}" if msg.startswith(head) else msg)
    return None if rd.problems else part


# --------------------------------------------------------------------------------------------
# varied keys
# --------------------------------------------------------------------------------------------


def _glossary_key(key: str) -> str:
    parts = key.split(".")
    if parts[0] == "capacitor" and len(parts) >= 3:
        return ".".join(["capacitor", *parts[2:]])
    return key


def _resolve(d: Design, key: str):
    """The object a key path names in a design, or raise KeyError with the reason."""
    parts = key.split(".")
    obj: Any = d
    k = 0
    while k < len(parts):
        name = parts[k]
        if name == "capacitor" and obj is d:
            if k + 1 >= len(parts):
                raise KeyError("name the bank: capacitor.<name>.<key>")
            bank = parts[k + 1]
            found = [c for c in d.capacitors if c.name == bank]
            if not found:
                raise KeyError(f"no capacitor bank {bank!r}")
            obj = found[0]
            k += 2
            continue
        if not dataclasses.is_dataclass(obj) or name not in {
            f.name for f in dataclasses.fields(obj)
        }:
            raise KeyError(f"no key {name!r} here")
        obj = getattr(obj, name)
        k += 1
    return obj


def _vary_values(base: Design, key, raw, problems) -> np.ndarray | None:
    where = f"vary: {key}"
    if not isinstance(key, str) or not key:
        problems.append(f"vary: expected a key path such as 'inductor.l', got {key!r}")
        return None
    if key.startswith("operating.") and key != "operating.fsw":
        problems.append(
            f"{where}: the operating envelope is the design's own; vary the parts, their "
            "keys and operating.fsw"
        )
        return None
    try:
        dim = glossary_dimension(_glossary_key(key))
        current = _resolve(base, key)
    except KeyError as exc:
        reason = exc.args[0] if exc.args else "unknown key"
        problems.append(f"{where}: not a key of the design ({reason})")
        return None
    if current is None:
        problems.append(f"{where}: the design does not give this key; give it in the design")
        return None
    if isinstance(current, bool | str) or not isinstance(current, int | float | Value | Curve
                                                         | Range):
        problems.append(f"{where}: expected a numeric key, got a {type(current).__name__}")
        return None
    seq = raw if isinstance(raw, list | tuple | np.ndarray) else [raw]
    if len(seq) == 0:
        problems.append(f"{where}: expected at least one value")
        return None
    out = []
    for j, v in enumerate(seq):
        try:
            x = parse_quantity(v, dim, where=f"{where}[{j}]")
        except DesignError as exc:
            problems.extend(exc.problems)
            continue
        if not (np.isfinite(x) and (x > 0 or dim == "temperature")):
            problems.append(f"{where}[{j}]: expected a positive finite value, got {v!r}")
            continue
        if isinstance(current, int) and x != int(x):
            problems.append(f"{where}[{j}]: expected a whole number, got {v!r}")
            continue
        out.append(x)
    return np.asarray(out, dtype=float) if len(out) == len(seq) else None


def _scaled(obj, x: float):
    """``obj`` set to ``x``: a Value, a Curve or a Range scales as a whole (keeps its spread)."""
    if isinstance(obj, Value):
        return Value(typ=x, worst=obj.worst * x / obj.typ)
    if isinstance(obj, Curve):
        f = x / obj.typ[0]
        return Curve(t=obj.t, typ=tuple(v * f for v in obj.typ),
                     worst=tuple(v * f for v in obj.worst))
    if isinstance(obj, Range):
        f = x / obj.nom
        return Range(min=obj.min * f, nom=x, max=obj.max * f)
    if isinstance(obj, int):
        return int(x)
    return x


def _set_in(obj, names: list[str], x: float):
    if not names:
        return _scaled(obj, x)
    head = names[0]
    return dataclasses.replace(obj, **{head: _set_in(getattr(obj, head), names[1:], x)})


def _set_key(d: Design, key: str, x: float) -> Design:
    parts = key.split(".")
    if parts[0] == "capacitor":
        caps = tuple(
            _set_in(c, parts[2:], x) if c.name == parts[1] else c for c in d.capacitors
        )
        return dataclasses.replace(d, capacitors=caps)
    return _set_in(d, parts, x)


def _replace_slot(d: Design, slot: str, part) -> Design:
    if slot.startswith("capacitor."):
        bank = slot.split(".", 1)[1]
        caps = tuple(part if c.name == bank else c for c in d.capacitors)
        return dataclasses.replace(d, capacitors=caps)
    return dataclasses.replace(d, **{slot: part})


# --------------------------------------------------------------------------------------------
# stacking: parts with the same layout as one object whose differing numbers are arrays
# --------------------------------------------------------------------------------------------


def _is_number(x) -> bool:
    return isinstance(x, int | float | np.floating | np.integer) and not isinstance(x, bool)


def structure_key(obj, name: str = ""):
    """A hashable description of an object's layout: what must be equal to stack it."""
    if name in STRUCTURAL:
        return (name, obj)
    if name in RECORDED:
        return name
    if dataclasses.is_dataclass(obj):
        fields = dataclasses.fields(obj)
        return (type(obj).__name__, *(structure_key(getattr(obj, f.name), f.name) for f in fields))
    if _is_number(obj):
        return "#"
    if isinstance(obj, tuple) and obj and all(_is_number(v) for v in obj):
        return ("#", len(obj))
    if isinstance(obj, tuple):
        return tuple(structure_key(v) for v in obj)
    return obj


def stack_objects(objs: list, index: np.ndarray, name: str = "", *, curve: bool = False):
    """One object of the common layout, each differing number an array over ``index``.

    ``objs`` share one layout (:func:`structure_key`); ``index`` picks, per variant, which
    object it takes. Numbers equal in every object stay scalars; the points of a curve
    (:class:`~lossbudget.design.Curve`) that differ become an array of shape (variants,
    points); any other tuple of numbers (``ct``, ``fit_range``) a tuple of arrays.
    """
    first = objs[0]
    if all(o is first for o in objs) or _equal(objs) or name in RECORDED:
        return first
    if dataclasses.is_dataclass(first):
        is_curve = isinstance(first, Curve)
        return dataclasses.replace(
            first,
            **{
                f.name: stack_objects(
                    [getattr(o, f.name) for o in objs], index, f.name, curve=is_curve
                )
                for f in dataclasses.fields(first)
                if f.init
            },
        )
    if _is_number(first):
        return np.asarray(objs, dtype=float)[index]
    if curve and isinstance(first, tuple) and all(_is_number(v) for v in first):
        return np.asarray(objs, dtype=float)[index]
    if isinstance(first, tuple):
        return tuple(stack_objects(list(col), index) for col in zip(*objs, strict=True))
    raise ValueError(f"cannot stack differing values of {name or type(first).__name__}")


def _equal(objs) -> bool:
    try:
        return all(o == objs[0] for o in objs[1:])
    except (ValueError, TypeError):
        return False


def subset(v: Variants, members: np.ndarray) -> Variants:
    """The variants ``members`` of ``v``, in that order."""
    return Variants(
        base=v.base,
        slots=v.slots,
        index={s: i[members] for s, i in v.index.items()},
        values={k: x[members] for k, x in v.values.items()},
        source=v.source,
    )


def stacked_design(v: Variants, members: np.ndarray) -> Design:
    """The base design with each slot and varied key an array over ``members`` (one group)."""
    d = v.base
    for slot, alts in v.slots.items():
        idx = v.index[slot][members]
        used = np.unique(idx)
        local = np.searchsorted(used, idx)
        d = _replace_slot(d, slot, stack_objects([alts[j].part for j in used], local))
    for key, vals in v.values.items():
        d = _set_key_array(d, key, vals[members])
    return d


def _scaled_array(obj, x: np.ndarray):
    if isinstance(obj, Value):
        return Value(typ=x, worst=np.asarray(obj.worst) * x / np.asarray(obj.typ))
    if isinstance(obj, Curve):
        typ = np.asarray(obj.typ, dtype=float)
        worst = np.asarray(obj.worst, dtype=float)
        f = (x / (typ[..., 0] if typ.ndim > 1 else typ[0]))[:, None]
        t = np.asarray(obj.t, dtype=float)
        return Curve(
            t=np.broadcast_to(t, (x.size, t.shape[-1])) if t.ndim > 1 else obj.t,
            typ=typ * f,
            worst=worst * f,
        )
    if isinstance(obj, Range):
        f = x / np.asarray(obj.nom)
        return Range(min=obj.min * f, nom=x, max=obj.max * f)
    return x


def _set_in_array(obj, names: list[str], x: np.ndarray):
    if not names:
        return _scaled_array(obj, x)
    head = names[0]
    return dataclasses.replace(obj, **{head: _set_in_array(getattr(obj, head), names[1:], x)})


def _set_key_array(d: Design, key: str, x: np.ndarray) -> Design:
    parts = key.split(".")
    if parts[0] == "capacitor":
        caps = tuple(
            _set_in_array(c, parts[2:], x) if c.name == parts[1] else c for c in d.capacitors
        )
        return dataclasses.replace(d, capacitors=caps)
    return _set_in_array(d, parts, x)


def take(obj, index: np.ndarray):
    """A stacked object with every variant array taken at ``index`` (per operating point)."""
    if isinstance(obj, np.ndarray):
        return obj[index] if obj.ndim >= 1 else obj
    if dataclasses.is_dataclass(obj) and not isinstance(obj, type):
        changes = {}
        for f in dataclasses.fields(obj):
            if not f.init:
                continue
            val = getattr(obj, f.name)
            new = take(val, index)
            if new is not val:
                changes[f.name] = new
        return dataclasses.replace(obj, **changes) if changes else obj
    if isinstance(obj, tuple) and any(isinstance(v, np.ndarray) or dataclasses.is_dataclass(v)
                                      for v in obj):
        return tuple(take(v, index) for v in obj)
    if isinstance(obj, dict):
        return {k: take(v, index) for k, v in obj.items()}
    return obj

