"""Readers of ``[supports]``, ``[[loads]]``, ``[[combinations]]``, ``[shape]``,
``[beam_reference]``, ``[analysis]`` and ``[report]`` (a mixin of the case reader)."""
from __future__ import annotations

import math
from typing import Mapping

import numpy as np

from ..errors import CaseError
from ..patterns import PatternIndex
from ..spec import (DIRECTIONS, AdjustGroup, AnalysisSettings, BeamReference, Combination, MemberLoad, NodalLoad,
    PatchLoad, PrescribedDisplacement, SelfWeight, ShapeSpec, TemperatureLoad, support_mask)
from .units import describe_value
from .case_base import (ADJUST_KEYS, ANALYSIS_KEYS, BEAM_REFERENCE_KEYS, COMBINATION_KEYS, CONTROLS,
                        interior_node_ids, key_join, LOAD_FORMS, LOAD_KEYS, MAX_COORDINATE, REPORT_KEYS,
                        SHAPE_KEYS, SHAPE_METHODS, solver_unavailable, SOLVERS, _bool, _check_keys,
                        _far_message, _integer, _name, _names_list, _require, _show, _string, _suggest,
                        _table)


class LoadTables:
    """Supports, loads, combinations, shape, beam reference, analysis, report (mixed into the case reader)."""

    # -- supports ---------------------------------------------------------------
    def supports(self, value) -> dict[str, tuple[bool, ...]]:
        out = {}
        for name, code in _table(value, "supports", "a table of support codes").items():
            key = key_join("supports", name)
            self.node(name, key)
            if not isinstance(code, str) or support_mask(code) is None:
                found = _show(code) if isinstance(code, str) else describe_value(code)
                raise CaseError(key, f"unknown support code {found} "
                                '(valid: any space-separated set of x y z rx ry rz, or "all", or "pin")')
            mask = support_mask(code)
            rotations = [d for d, on in zip(DIRECTIONS[3:], mask[3:]) if on]
            if rotations and code.split() != ["all"] and name not in self.rotation_nodes:
                raise CaseError(key, f'node "{name}" has no rotations (it is joined to no beam), so '
                                f'{" ".join(rotations)} {"restrains" if len(rotations) == 1 else "restrain"} nothing; '
                                'use "x y z" (or "pin", "all")')
            out[name] = mask
        return out

    def joined_node(self, name: str, key: str, consequence: str) -> None:
        """A node that carries a load, support movement or target must be joined to a member."""
        if name not in self.joined:
            raise CaseError(key, f'node "{name}" is joined to no member: {consequence}; '
                            "join the node to a member or remove the entry")

    def node(self, name, key) -> str:
        """Check that a node id exists (declared or interior)."""
        if not isinstance(name, str):
            raise CaseError(key, f"expected a node id (a string), found {describe_value(name)}")
        if name not in self.index:
            raise CaseError(key, f'no node named "{name}"' + _suggest(name, self.index))
        return name

    # -- loads ------------------------------------------------------------------
    def loads(self, value) -> list:
        if not isinstance(value, list):
            raise CaseError("loads", f"expected an array of tables ([[loads]]), found {describe_value(value)}")
        return [self.load(entry, f"loads[{k}]") for k, entry in enumerate(value)]

    def load(self, entry, key):
        entry = _table(entry, key)
        _check_keys(entry, key, LOAD_KEYS)
        case = _name(_require(entry, "case", key, 'the load case name, e.g. case = "dead"'), f"{key}.case",
                     "a load case name")
        present = set(entry) - {"case"}
        kinds = [k for k in ("self_weight", "node", "members", "path") if k in entry]
        forms = {
            "self_weight": [{"self_weight", "factor"}],
            "node": [{"node", "force", "moment"}, {"node", "displacement", "rotation"}],
            "members": [{"members", "per_length"}, {"members", "temperature"}],
            "path": [{"path", "per_length", "start", "end"}],
        }
        needed = {"node": ({"force", "moment"}, {"displacement", "rotation"}),
                  "members": ({"per_length"}, {"temperature"}), "path": ({"per_length"},)}
        valid = len(kinds) == 1 and any(present <= form for form in forms[kinds[0]])
        if valid and kinds[0] in needed:
            valid = any(present & must for must in needed[kinds[0]])
        if not valid:
            found = ", ".join(sorted(present)) or "nothing but case"
            raise CaseError(key, f"cannot tell what load this is from its keys ({found}); valid forms: {LOAD_FORMS}")
        kind = kinds[0]
        if kind == "self_weight":
            if entry["self_weight"] is not True:
                raise CaseError(f"{key}.self_weight", f"expected true, found {describe_value(entry['self_weight'])} "
                                "(leave the load out instead)")
            factor = self.optional(entry, "factor", "dimensionless", key, default=1.0)
            if not factor > 0.0:
                raise CaseError(f"{key}.factor", f"expected a self-weight factor > 0, found {_show(entry['factor'])} "
                                "(weight acts downwards; leave the load out for none)")
            return SelfWeight(case=case, key=key, factor=factor)
        if kind == "node":
            node = self.node(entry["node"], f"{key}.node")
            self.joined_node(node, f"{key}.node",
                             "a load there acts on no member and would vanish into a reaction"
                             if "displacement" not in entry and "rotation" not in entry
                             else "moving it would move no member")
            if "force" in entry or "moment" in entry:
                force = self.q.vector(entry["force"], "force", f"{key}.force") if "force" in entry else (0.0, 0.0, 0.0)
                moment = None
                if "moment" in entry:
                    moment = self.q.vector(entry["moment"], "moment", f"{key}.moment")
                    if any(moment) and node not in self.rotation_nodes:
                        raise CaseError(f"{key}.moment", f'node "{node}" has no rotations (only nodes joined '
                                        "to beams take moments)")
                return NodalLoad(case=case, node=node, force=force, moment=moment, key=key)
            return self.displacement(entry, case, node, key)
        if kind == "members":
            patterns = self.patterns(entry["members"], f"{key}.members")
            if "per_length" in entry:
                return MemberLoad(case=case, members=patterns, key=key,
                                  per_length=self.q.vector(entry["per_length"], "force_per_length",
                                                           f"{key}.per_length"))
            delta_t = self.quantity(entry["temperature"], "temperature_difference", f"{key}.temperature")
            if not any(self.expands[self.member_list[k].section] for k in self.member_index.indices(patterns)):
                raise CaseError(f"{key}.temperature", "no member it applies to has a thermal expansion "
                                "coefficient (alpha of its material is 0 or missing), so the temperature "
                                "change would do nothing; give the material an alpha")
            return TemperatureLoad(case=case, members=patterns, key=key, delta_t=delta_t)
        return self.patch(entry, case, key)

    def displacement(self, entry, case, node, key) -> PrescribedDisplacement:
        mask = self.supports_map.get(node, (False,) * 6)
        values = []
        for name, kind, offset in (("displacement", "length", 0), ("rotation", "angle", 3)):
            if name not in entry:
                values.append(None)
                continue
            vector = self.q.vector(entry[name], kind, f"{key}.{name}")
            kept = []
            for d, v in enumerate(vector):
                if mask[offset + d]:
                    kept.append(v)
                elif v == 0.0:
                    kept.append(None)
                else:
                    code = " ".join(x for x, m in zip(DIRECTIONS, mask) if m)
                    support = f"its support: {code}" if code else "it has no support"
                    raise CaseError(f"{key}.{name}[{d}]", f'node "{node}" is not restrained in '
                                    f"{DIRECTIONS[offset + d]} ({support}); only restrained "
                                    "directions can be given a movement")
            if name == "rotation" and node not in self.rotation_nodes and any(vector):
                # reached with support "all" only: its rx ry rz stand for no DOF here
                raise CaseError(f"{key}.rotation", f'node "{node}" has no rotations (it is joined to no beam); '
                                "a prescribed rotation would do nothing")
            values.append(tuple(kept))
        displacement = values[0] if values[0] is not None else (None, None, None)
        return PrescribedDisplacement(case=case, node=node, displacement=displacement, rotation=values[1], key=key)

    def patterns(self, value, key) -> tuple[str, ...]:
        patterns = _names_list(value, key, "member ids or patterns", allow_single=True)
        for k in self.member_index.unmatched(patterns):
            where = f"{key}[{k}]" if isinstance(value, list) else key
            raise CaseError(where, f'"{patterns[k]}" matches no member' + _suggest(patterns[k], self.member_ids))
        return patterns

    def joined_pairs(self) -> set[tuple[str, str]]:
        """Node pairs joined by an element (interior chains included), built on first use."""
        if getattr(self, "_pairs", None) is None:
            pairs = set()
            for m in self.member_list:
                chain = (m.nodes[0], *interior_node_ids(m.id, m.divide), m.nodes[1])
                for a, b in zip(chain[:-1], chain[1:]):
                    pairs.add((a, b) if a < b else (b, a))
            self._pairs = pairs
        return self._pairs

    def patch(self, entry, case, key) -> PatchLoad:
        path = _names_list(entry["path"], f"{key}.path", "node ids")
        if len(path) < 2:
            raise CaseError(f"{key}.path", f"a path needs at least two nodes, found {len(path)}")
        for k, name in enumerate(path):
            self.node(name, f"{key}.path[{k}]")
        pairs = self.joined_pairs()
        for k, (a, b) in enumerate(zip(path[:-1], path[1:])):
            if ((a, b) if a < b else (b, a)) not in pairs:
                raise CaseError(f"{key}.path[{k + 1}]", f'nodes "{a}" and "{b}" are not joined by a member '
                                "(consecutive path nodes must be the two ends of one element)")
        points = self.coords[[self.index[n] for n in path]]
        total = float(np.linalg.norm(np.diff(points, axis=0), axis=1).sum())
        start = self.optional(entry, "start", "length", key, default=0.0)
        end = self.optional(entry, "end", "length", key)
        # a path length typed from a drawing may differ from the float sum in the last digits
        slack = 1e-9 * max(total, 1.0)
        if start < 0.0 or (end is None and start >= total):
            raise CaseError(f"{key}.start", f"expected 0 <= start < path length ({total:.6g} m), "
                            f"found {_show(entry['start'])}")
        if end is not None:
            if end <= start:
                raise CaseError(f"{key}.end", f"expected end > start ({start:.6g} m), found {_show(entry['end'])}")
            if end > total + slack:
                raise CaseError(f"{key}.end", f"end = {_show(entry['end'])} is beyond the path length "
                                f"{total:.6g} m")
            end = min(end, total)
        per_length = self.q.vector(entry["per_length"], "force_per_length", f"{key}.per_length")
        return PatchLoad(case=case, path=path, per_length=per_length, start=start, end=end, key=key)

    # -- combinations, shape, analysis -----------------------------------------
    def combinations(self, value, cases) -> list[Combination]:
        if not isinstance(value, list):
            raise CaseError("combinations", f"expected an array of tables ([[combinations]]), "
                            f"found {describe_value(value)}")
        out, seen = [], {}
        for k, entry in enumerate(value):
            key = f"combinations[{k}]"
            entry = _table(entry, key)
            _check_keys(entry, key, COMBINATION_KEYS)
            name = _name(_require(entry, "name", key, "the combination name"), f"{key}.name", "a combination name")
            if name in seen:
                raise CaseError(f"{key}.name", f'duplicate combination name "{name}" (first at {seen[name]})')
            seen[name] = key
            factors_key = f"{key}.factors"
            table = _table(_require(entry, "factors", key, "the factors, e.g. factors = { dead = 1.0 }"),
                           factors_key, "an inline table of load case = factor")
            if not table:
                raise CaseError(factors_key, "expected at least one load case = factor, found an empty table")
            factors = {}
            for case, factor in table.items():
                fkey = key_join(factors_key, case)
                if case not in cases:
                    raise CaseError(fkey, f'no load defines the load case "{case}"'
                                    + _suggest(case, sorted(cases), listed=1000))
                factors[case] = self.quantity(factor, "dimensionless", fkey)
                if factors[case] < 0.0 and case in self.weight_cases:
                    raise CaseError(fkey, f'a negative factor on load case "{case}" would turn its self-weight '
                                    "upwards; weight acts downwards (use a factor >= 0)")
            out.append(Combination(name=name, factors=factors, key=key))
        return out

    def shape(self, value, cases) -> ShapeSpec:
        table = _table(value, "shape")
        _check_keys(table, "shape", SHAPE_KEYS)
        method = _string(table.get("method", "target"), "shape.method")
        if method not in SHAPE_METHODS:
            raise CaseError("shape.method", f'unknown form-finding method "{method}" '
                            f'(known: {", ".join(SHAPE_METHODS)})')
        permanent = ()
        if "permanent" in table:
            raw = table["permanent"]
            permanent = () if raw == [] else _names_list(raw, "shape.permanent", "load case names")
            for k, case in enumerate(permanent):
                if case not in cases:
                    raise CaseError(f"shape.permanent[{k}]", f'no load defines the load case "{case}"'
                                    + _suggest(case, sorted(cases), listed=1000))
        own = {"target": ("targets", "adjust"), "force-density": ("force_density",)}
        for other, keys in own.items():
            for name in keys:
                if other != method and name in table:
                    raise CaseError(f"shape.{name}", f'"{name}" belongs to method "{other}", '
                                    f'but method is "{method}"')
        for name in own[method]:
            if name not in table:
                raise CaseError(f"shape.{name}", f'missing: method "{method}" needs {" and ".join(own[method])}')
        targets, adjust, force_density = {}, [], {}
        if method == "target":
            for name, coords in _table(table["targets"], "shape.targets", "a table node = { x, y, z }").items():
                key = key_join("shape.targets", name)
                self.node(name, key)
                self.joined_node(name, key, "no member length can move it, so the target cannot be reached")
                coords = _table(coords, key, "a table of x, y and/or z, e.g. { z = 0.0 }")
                if not coords:
                    raise CaseError(key, "expected at least one of x, y, z")
                _check_keys(coords, key, ("x", "y", "z"))
                targets[name] = {axis: self.quantity(v, "length", key_join(key, axis)) for axis, v in coords.items()}
            if not targets:
                raise CaseError("shape.targets", "expected at least one target node")
            groups = table["adjust"]
            if isinstance(groups, Mapping):
                groups = [groups]
            if not isinstance(groups, list) or not groups:
                raise CaseError("shape.adjust", "expected one or more [[shape.adjust]] tables, "
                                f"found {describe_value(groups)}")
            for k, group in enumerate(groups):
                key = f"shape.adjust[{k}]"
                group = _table(group, key)
                _check_keys(group, key, ADJUST_KEYS)
                members = self.patterns(_require(group, "members", key, 'member ids or patterns, e.g. members = "H*"'),
                                        f"{key}.members")
                together = _bool(group["together"], f"{key}.together") if "together" in group else False
                adjust.append(AdjustGroup(members=members, together=together, key=key))
        else:
            table_fd = _table(table["force_density"], "shape.force_density", 'a table pattern = force density')
            if not table_fd:
                raise CaseError("shape.force_density", "expected at least one pattern = force density")
            for pattern, density in table_fd.items():
                key = key_join("shape.force_density", pattern)
                self.patterns(pattern, key)
                q = self.quantity(density, "force_per_length", key)
                if q == 0.0:
                    raise CaseError(key, "a force density of 0 removes the members from the net; "
                                    "expected a non-zero value")
                force_density[pattern] = q
        return ShapeSpec(
            method=method, permanent=permanent,
            tolerance=self.optional(table, "tolerance", "length", "shape", "positive", default=ShapeSpec.tolerance),
            targets=targets, adjust=tuple(adjust), force_density=force_density,
            fabrication_temperature=self.optional(table, "fabrication_temperature", "temperature_difference", "shape"),
            max_iterations=(_integer(table["max_iterations"], "shape.max_iterations", 1)
                            if "max_iterations" in table else ShapeSpec.max_iterations),
        )

    def beam_reference(self, value) -> dict[str, BeamReference]:
        """``[beam_reference]``: stress-free position and rotation of beam nodes (m, rad)."""
        out = {}
        for name, entry in _table(value, "beam_reference", "a table of node ids").items():
            key = key_join("beam_reference", name)
            self.node(name, key)
            if name not in self.rotation_nodes:
                raise CaseError(key, f'node "{name}" is joined to no beam; a stress-free geometry is '
                                "given for beam nodes only")
            entry = _table(entry, key, "a table { position = [x, y, z], rotation = [rx, ry, rz] }")
            _check_keys(entry, key, BEAM_REFERENCE_KEYS)
            position = self.q.vector(_require(entry, "position", key, "the stress-free position [x, y, z]"),
                                     "length", f"{key}.position")
            rotation = (self.q.vector(entry["rotation"], "angle", f"{key}.rotation")
                        if "rotation" in entry else (0.0, 0.0, 0.0))
            for part, vector in (("position", position), ("rotation", rotation)):
                bad = [k for k, v in enumerate(vector) if not math.isfinite(v)]
                if bad:
                    raise CaseError(f"{key}.{part}[{bad[0]}]", f"expected a finite number, found {vector[bad[0]]!r}")
            if max(map(abs, position)) > MAX_COORDINATE:
                raise CaseError(f"{key}.position", _far_message(position))
            out[name] = BeamReference(name, position, rotation, key)
        return out

    def analysis(self, value) -> AnalysisSettings:
        table = _table(value, "analysis")
        _check_keys(table, "analysis", ANALYSIS_KEYS)
        defaults = AnalysisSettings()
        solver = _string(table.get("solver", defaults.solver), "analysis.solver")
        if solver not in SOLVERS:
            raise CaseError("analysis.solver", f'unknown linear solver "{solver}" (known: {", ".join(SOLVERS)})')
        problem = solver_unavailable(solver)
        if problem:
            raise CaseError("analysis.solver", problem)
        return AnalysisSettings(
            increments=_integer(table.get("increments", defaults.increments), "analysis.increments", 1),
            tolerance=self.optional(table, "tolerance", "dimensionless", "analysis", "positive",
                                    default=defaults.tolerance),
            max_iterations=_integer(table.get("max_iterations", defaults.max_iterations),
                                    "analysis.max_iterations", 1),
            solver=solver,
            max_cuts=_integer(table.get("max_cuts", defaults.max_cuts), "analysis.max_cuts", 0),
            max_total_iterations=_integer(table.get("max_total_iterations", defaults.max_total_iterations),
                                          "analysis.max_total_iterations", 1),
            max_total_cuts=_integer(table.get("max_total_cuts", defaults.max_total_cuts),
                                    "analysis.max_total_cuts", 0),
            **self.path_control(table),
        )

    def path_control(self, table) -> dict:
        """``[analysis]`` ``control`` and ``track`` as AnalysisSettings fields."""
        control = _string(table.get("control", "load"), "analysis.control")
        if control not in CONTROLS:
            raise CaseError("analysis.control", f'unknown control "{control}"' + _suggest(control, CONTROLS))
        track = table.get("track", [])
        if not isinstance(track, list):
            raise CaseError("analysis.track", f"expected an array of node ids, found {describe_value(track)}")
        names = tuple(self.node(n, f"analysis.track[{k}]") for k, n in enumerate(track))
        seen: dict[str, int] = {}
        for k, n in enumerate(names):
            if n in seen:
                raise CaseError(f"analysis.track[{k}]", f'node "{n}" is tracked twice '
                                f"(first at analysis.track[{seen[n]}])")
            seen[n] = k
        return {"control": control, "track": names}


    def report(self, value) -> dict:
        """``[report]``: ``deck`` node ids or patterns, each matching a node."""
        table = _table(value, "report", 'a table, e.g. [report] deck = ["D*"]')
        _check_keys(table, "report", REPORT_KEYS)
        out = dict(table)
        if "deck" in table:
            deck = _names_list(table["deck"], "report.deck", "node ids or patterns", allow_single=True)
            index = PatternIndex(list(self.index))
            for k in index.unmatched(deck):
                where = f"report.deck[{k}]" if isinstance(table["deck"], list) else "report.deck"
                raise CaseError(where, f'"{deck[k]}" matches no node' + _suggest(deck[k], index.ids))
            out["deck"] = list(deck)
        return out


