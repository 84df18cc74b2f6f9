"""Hypothesis strategies that break valid scenarios the ways people (and programs) do."""

from __future__ import annotations

import copy
from typing import Any

from hypothesis import strategies as st

from tests.conftest import scenario_data
from tuneopt.model import Scenario

# The shipped scenarios that stand alone (the wet trail scenario only says what differs).
BASES = ("trail_air", "enduro_coil", "downhill_coil")
_DATA = {name: scenario_data(name) for name in BASES}

Path = tuple[str | int, ...]

UNITS = (
    "mm", "m", "in", "psi", "bar", "Pa", "kg", "lb", "lbf/in", "N/mm", "N*s/m", "m/s",
    "km/h", "deg", "rad", "cc", "m^3", "furlongs", "xyz", "%", "", "mm/s/s", "kelvin",
)  # fmt: skip

numbers = st.one_of(
    st.sampled_from([0, -1, 1, -0.0, 1e308, -1e308, 1e-308, 2**63, -(2**63), 10**40]),
    st.integers(-(10**12), 10**12),
    st.floats(allow_nan=True, allow_infinity=True),
)
quantities = st.builds(
    lambda n, u: f"{n} {u}".strip(),
    st.one_of(st.integers(-1000, 10**6), st.floats(allow_nan=True, allow_infinity=True)),
    st.sampled_from(UNITS),
)
junk_text = st.one_of(
    st.text(max_size=30),
    st.sampled_from(["", " ", "nan", "inf", "-inf", "1e999", "0x10", "None", "true", "∞ mm",
                     "１５０ mm", "150 mm mm", "mm 150", "150,5 mm", "\x00", "\u202e150 mm"]),
)  # fmt: skip
scalars = st.one_of(st.booleans(), numbers, quantities, junk_text)
junk = st.recursive(
    scalars,
    lambda inner: st.one_of(
        st.lists(inner, max_size=4),
        st.dictionaries(st.text(min_size=1, max_size=8), inner, max_size=4),
    ),
    max_leaves=8,
)


def paths(node: Any, prefix: Path = ()) -> list[Path]:
    """Every path to a value inside ``node`` (tables and arrays included), depth first."""
    out: list[Path] = []
    items = node.items() if isinstance(node, dict) else enumerate(node)
    for key, value in items:
        here = (*prefix, key)
        out.append(here)
        if isinstance(value, dict | list):
            out += paths(value, here)
    return out


def _parent(data: Any, path: Path) -> Any:
    node = data
    for key in path[:-1]:
        node = node[key]
    return node


def apply(data: dict[str, Any], path: Path, action: str, value: Any) -> None:
    """Change ``data`` in place at ``path``; a path a previous change removed is skipped."""
    try:
        parent = _parent(data, path)
        old = parent[path[-1]]
    except (KeyError, IndexError, TypeError):
        return
    key = path[-1]
    if action == "delete":
        del parent[key]
    elif action == "replace":
        parent[key] = value
    elif action == "wrap_in_list":  # a list where a table or value goes
        parent[key] = [old]
    elif action == "scale" and isinstance(old, int | float) and not isinstance(old, bool):
        parent[key] = old * value if isinstance(value, int | float) else value
    elif action == "rescale":  # the same kind of value, far from the usual size
        parent[key] = _rescaled(old, value)
    elif action == "unknown_key" and isinstance(old, dict):
        old[f"zz_{str(value)[:10]}"] = 1
    elif action == "empty":
        parent[key] = type(old)() if isinstance(old, dict | list | str) else ""
    else:
        parent[key] = value


ACTIONS = ("delete", "replace", "replace", "wrap_in_list", "scale", "unknown_key", "empty",
           "rescale", "rescale", "rescale")  # fmt: skip
FACTORS = (0.001, 0.1, 0.5, 0.9, 1.1, 2.0, 10.0, 1000.0)


def _rescaled(old: Any, factor: float) -> Any:
    """``old`` times ``factor``: numbers, the number in "150 mm", each number in a list."""
    if isinstance(old, bool):
        return old
    if isinstance(old, int):
        return int(old * factor)
    if isinstance(old, float):
        return old * factor
    if isinstance(old, list):
        return [_rescaled(v, factor) for v in old]
    if isinstance(old, str):
        number, _, unit = old.partition(" ")
        try:
            return f"{float(number) * factor:g} {unit}".strip()
        except ValueError:
            return old
    return old


@st.composite
def broken_scenarios(draw: st.DrawFn, max_changes: int = 3) -> tuple[str, dict[str, Any]]:
    """(base scenario name, its data with one to ``max_changes`` changes)."""
    name = draw(st.sampled_from(BASES))
    data = copy.deepcopy(_DATA[name])
    every = paths(data)
    for _ in range(draw(st.integers(1, max_changes))):
        path = draw(st.sampled_from(every))
        action = draw(st.sampled_from(ACTIONS))
        if action == "scale":
            value = draw(st.sampled_from([0, -1, 1e-9, 1e9, 1e300, float("nan"), float("inf")]))
        elif action == "rescale":
            value = draw(st.sampled_from(FACTORS))
        else:
            value = draw(junk)
        apply(data, path, action, value)
    if draw(st.integers(0, 7)) == 0:  # a base file to start from (read only from files)
        names = st.sampled_from(["scenario.json", "scenario.toml", "nope.toml", "", ".",
                                 "/dev/null", "enduro_shock_dyno.csv", "a\x00b"])  # fmt: skip
        data["base"] = draw(st.one_of(names, junk))
    return name, data


def names_a_field(location: str, data: dict[str, Any]) -> bool:
    """The location starts at a field of the scenario, or at a key the input has (shown
    escaped, and cut short, when it holds control characters)."""
    if not location:
        return False
    fields = [*Scenario.model_fields, *(str(k) for k in data)]
    if any(location == f or location.startswith((f + ".", f + "[", f + " (")) for f in fields):
        return True
    return any(location.startswith(repr(str(k))[:50]) for k in data)
