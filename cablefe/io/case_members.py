"""Reader of ``[[members]]`` and ``[[member_table]]``: member records, sizes and
the stress-free data each member needs (a mixin of the case reader)."""
from __future__ import annotations

import itertools
import math
from typing import Mapping

import numpy as np

from ..errors import CaseError
from ..spec import MEMBER_TYPES, Member
from .units import describe_value
from .case_base import (interior_node_ids, MAX_COORDINATE, MAX_DOFS, MAX_ELEMENTS, MEMBER_KEYS,
                        MEMBER_TABLE_KEYS, ZERO_LENGTH_FRACTION, _bool, _check_keys, _collector_paused,
                        _far_message, _integer, _interior_positions, _member_type, _name, _number_array,
                        _PLAIN_MEMBER_KEYS, _require, _section_name, _show, _string_array, _suggest, _table,
                        _type_specific, _unique)


class MemberTables:
    """``[[members]]`` and ``[[member_table]]`` (mixed into the case reader)."""

    # -- members --------------------------------------------------------------
    def members(self, long_form, compact, nodes, sections, materials) -> list[Member]:
        if not isinstance(long_form, list):
            raise CaseError("members", f"expected an array of tables ([[members]]), found {describe_value(long_form)}")
        records = self.plain_members(long_form, sections)
        if records is None:  # some entry is not plain, or is wrong: the full check names its key
            records = [self.member_entry(entry, f"members[{k}]", sections) for k, entry in enumerate(long_form)]
        if isinstance(compact, Mapping):
            compact = [compact]
        if not isinstance(compact, list):
            raise CaseError("member_table", f"expected an array of tables ([[member_table]]), "
                            f"found {describe_value(compact)}")
        groups = [self.member_group(entry, f"member_table[{g}]", sections) for g, entry in enumerate(compact)]
        if not records and not any(len(group["ids"]) for group in groups):
            raise CaseError("members", "the case has no members ([[members]] or [[member_table]]): "
                            "there is nothing to analyse")
        self.check_size(records, groups, len(nodes))

        # unique member ids over both forms
        first_key = {rec["id"]: rec["key"] for rec in reversed(records)}
        if len(first_key) != len(records):   # a duplicate: name the first one met
            first_key = {}
            for rec in records:
                if rec["id"] in first_key:
                    raise CaseError(f"{rec['key']}.id",
                                    f'duplicate member id "{rec["id"]}" (first at {first_key[rec["id"]]})')
                first_key[rec["id"]] = rec["key"]
        seen = set(first_key)
        for g, group in enumerate(groups):
            def where(name, g=g):  # error path only
                if name in first_key:
                    return first_key[name]
                owner = next(h for h in groups[:g] if name in h["ids"])
                return f"{owner['key']}.ids[{owner['ids'].index(name)}]"
            _unique(group["ids"], f"{group['key']}.ids", "member id", seen, where)
            seen.update(group["ids"])

        # interior nodes of divided members
        owners: dict[str, tuple[int, int]] = {}
        for index, rec in enumerate(records):
            if rec["divide"] == 1:
                continue
            for k, nid in enumerate(interior_node_ids(rec["id"], rec["divide"]), start=1):
                if nid in nodes:
                    raise CaseError(self.node_key(nid), f'duplicate node id "{nid}": it is also interior node {k} '
                                    f'of divided member "{rec["id"]}" ({rec["key"]}.divide)')
                owners[nid] = (index, k)
        known = [*nodes, *owners]  # in case order, for suggestions
        # nodes that some element joins: only these carry stiffness
        self.joined: set[str] = set(owners)
        self.joined.update(itertools.chain.from_iterable(rec["nodes"] for rec in records))
        for group in groups:
            self.joined.update(group["i"])
            self.joined.update(group["j"])
        # every end that is no interior node is a declared node: the loop
        # below then has nothing to find in an undivided member
        ends_known = self.joined.difference(owners).issubset(nodes.keys())
        for rec in records:
            if ends_known and rec["divide"] == 1 and rec["nodes"][0] != rec["nodes"][1]:
                continue   # both ends are declared nodes and no interior node is an end
            for end, name in enumerate(rec["nodes"]):
                if name not in nodes and name not in owners:
                    raise CaseError(f"{rec['key']}.nodes[{end}]", f'no node named "{name}"'
                                    + _suggest(name, known))
                if name in owners and records[owners[name][0]] is rec:
                    raise CaseError(f"{rec['key']}.nodes[{end}]", f'"{name}" is an interior node of this '
                                    "member itself; a member must end at other nodes")
            if rec["nodes"][0] == rec["nodes"][1]:
                raise CaseError(f"{rec['key']}.nodes", f'both ends are node "{rec["nodes"][0]}"; '
                                "a member needs two different nodes (zero length)")

        self.check_coordinates(nodes, records)
        positions = _interior_positions(records, owners, nodes)
        self.index = {n: k for k, n in enumerate(nodes)}
        self.index.update((n, k) for k, n in enumerate(owners, start=len(nodes)))
        long_part = list(nodes.values())[: self.long_count]
        coords = np.concatenate([np.array(long_part, dtype=float).reshape(-1, 3), self.table_xyz,
                                 np.array([positions[n] for n in owners], dtype=float).reshape(-1, 3)])
        self.coords = coords
        extent = float(np.linalg.norm(np.ptp(coords, axis=0))) if len(coords) else 0.0
        tiny = ZERO_LENGTH_FRACTION * max(extent, 1.0)
        self.rotation_nodes: set[str] = set()

        # end-to-end lengths of all long-form members at once (the zero-length check)
        index = self.index
        ends = np.array([(index[rec["nodes"][0]], index[rec["nodes"][1]]) for rec in records],
                        dtype=np.int64).reshape(-1, 2)
        lengths = np.linalg.norm(coords[ends[:, 1]] - coords[ends[:, 0]], axis=1).tolist()
        with _collector_paused():
            members = [self.finish_member(rec, coords, tiny, sections, materials, length)
                       for rec, length in zip(records, lengths)]
        for group in groups:
            members.extend(self.finish_group(group, coords, tiny, sections, materials))
        return members

    def check_coordinates(self, nodes, records) -> None:
        """Every coordinate within :data:`MAX_COORDINATE` of the origin (m)."""
        declared = np.concatenate([np.array(list(nodes.values())[: self.long_count], dtype=float).reshape(-1, 3),
                                   self.table_xyz])
        far = np.flatnonzero(np.abs(declared).max(axis=1, initial=0.0) > MAX_COORDINATE)
        if far.size:
            name = list(nodes)[int(far[0])]
            raise CaseError(self.node_key(name), _far_message(declared[far[0]]))
        for rec in records:
            if rec["interior"] is not None:
                points = np.asarray(rec["interior"], dtype=float)
                far = np.flatnonzero(np.abs(points).max(axis=1) > MAX_COORDINATE)
                if far.size:
                    raise CaseError(f"{rec['key']}.interior[{int(far[0])}]", _far_message(points[far[0]]))

    def check_size(self, records, groups, declared: int) -> None:
        """Reject a model bigger than :data:`MAX_DOFS` / :data:`MAX_ELEMENTS` before building it."""
        interior = sum(rec["divide"] - 1 for rec in records)
        elements = len(records) + interior + sum(len(group["ids"]) for group in groups)
        nodes = declared + interior
        beam_nodes = (sum(rec["divide"] + 1 for rec in records if rec["type"] == "beam")
                      + sum(2 * len(group["ids"]) for group in groups if group["type"] == "beam"))
        dofs = 3 * nodes + 3 * min(beam_nodes, nodes)
        if dofs <= MAX_DOFS and elements <= MAX_ELEMENTS:
            return
        key = "members"
        if records:
            big = max(records, key=lambda rec: rec["divide"])
            if big["divide"] - 1 > nodes // 2:  # one divide makes most of the model
                key = f"{big['key']}.divide"
        raise CaseError(key, f"the model would have {elements:,} elements and about {dofs:,} degrees of "
                        f"freedom; cablefe accepts at most {MAX_ELEMENTS:,} elements and {MAX_DOFS:,} "
                        "degrees of freedom, since each needs about 6 kB of memory while solving (more "
                        "than one machine holds beyond that); check divide and the tables")

    def plain_members(self, long_form, sections) -> list[dict] | None:
        """Records of ``[[members]]`` entries when every one is plain, else None.

        Plain: only the keys id, type, nodes, section, tension_only (bars),
        and length0 or pretension (not beams) as bare numbers, all valid.
        A long-form net has 10^4-10^5 such entries, and the full check
        (:meth:`member_entry`) spends most of its time building key paths
        for errors that do not happen; here the columns are checked first
        and any doubt sends the whole list down the full check, which
        raises the error naming its key.
        """
        types = set(MEMBER_TYPES)
        length_factor = self.q.bare_factor("length")
        force_factor = self.q.bare_factor("force")
        records = []
        append = records.append
        for k, e in enumerate(long_form):
            if type(e) is not dict or not e.keys() <= _PLAIN_MEMBER_KEYS:
                return None
            mid, mtype, ends, section = e.get("id"), e.get("type"), e.get("nodes"), e.get("section")
            if (type(mid) is not str or type(mtype) is not str or mtype not in types or type(ends) is not list
                    or len(ends) != 2 or type(section) is not str or section not in sections):
                return None
            a, b = ends
            if type(a) is not str or type(b) is not str or not (mid.strip() and a.strip() and b.strip()
                                                                 and section.strip()):
                return None
            tension_only = e.get("tension_only", False)
            if type(tension_only) is not bool or ("tension_only" in e and mtype != "bar"):
                return None
            length0 = e.get("length0")
            pretension = e.get("pretension")
            if length0 is not None:
                if pretension is not None or mtype == "beam" or type(length0) not in (int, float):
                    return None
                length0 = float(length0 * length_factor)
                if not (math.isfinite(length0) and length0 > 0.0):
                    return None
            if pretension is not None:
                if mtype == "beam" or type(pretension) not in (int, float):
                    return None
                pretension = float(pretension * force_factor)
                if not math.isfinite(pretension):
                    return None
            append({"key": f"members[{k}]", "id": mid, "type": mtype, "nodes": (a, b), "section": section,
                    "tension_only": tension_only, "length0": length0, "pretension": pretension,
                    "divide": 1, "up": None, "interior": None})
        return records

    def member_entry(self, entry, key, sections) -> dict:
        entry = _table(entry, key)
        _check_keys(entry, key, MEMBER_KEYS)
        rec = {"key": key}
        rec["id"] = _name(_require(entry, "id", key, 'the member id, e.g. id = "M1"'), f"{key}.id", "a member id")
        rec["type"] = _member_type(_require(entry, "type", key, f'the member type ({" | ".join(MEMBER_TYPES)})'),
                                   f"{key}.type")
        ends = _require(entry, "nodes", key, 'the two end nodes, e.g. nodes = ["A", "B"]')
        if not isinstance(ends, list) or len(ends) != 2:
            found = f"{len(ends)} items" if isinstance(ends, list) else describe_value(ends)
            raise CaseError(f"{key}.nodes", f"expected an array of two node ids, found {found}")
        rec["nodes"] = tuple(_name(n, f"{key}.nodes[{k}]", "a node id") for k, n in enumerate(ends))
        rec["section"] = _section_name(_require(entry, "section", key, 'the section name, e.g. section = "main"'),
                                       f"{key}.section", sections)
        _type_specific(entry, key, rec["type"])
        rec["tension_only"] = _bool(entry["tension_only"], f"{key}.tension_only") if "tension_only" in entry else False
        rec["length0"] = self.optional(entry, "length0", "length", key, "positive")
        rec["pretension"] = self.optional(entry, "pretension", "force", key)
        rec["divide"] = _integer(entry["divide"], f"{key}.divide", 1) if "divide" in entry else 1
        rec["up"] = None
        if "up" in entry:
            up = self.q.vector(entry["up"], "dimensionless", f"{key}.up")
            if not any(up):
                raise CaseError(f"{key}.up", "the up vector must not be zero")
            rec["up"] = up
        rec["interior"] = None
        if "interior" in entry:
            rec["interior"] = self.interior_coordinates(entry["interior"], rec["divide"], f"{key}.interior")
        return rec

    def interior_coordinates(self, value, divide, key):
        if divide < 2:
            raise CaseError(key, "interior coordinates need divide >= 2")
        if not isinstance(value, list) or len(value) != divide - 1:
            found = f"{len(value)}" if isinstance(value, list) else describe_value(value)
            raise CaseError(key, f"expected {divide - 1} points [x, y, z] (divide - 1), found {found}")
        return tuple(self.q.vector(p, "length", f"{key}[{k}]") for k, p in enumerate(value))

    def member_group(self, entry, key, sections) -> dict:
        entry = _table(entry, key)
        _check_keys(entry, key, MEMBER_TABLE_KEYS)
        group = {"key": key}
        group["type"] = _member_type(_require(entry, "type", key, f'the member type ({" | ".join(MEMBER_TYPES)})'),
                                     f"{key}.type")
        group["section"] = _section_name(_require(entry, "section", key, "the section name"),
                                         f"{key}.section", sections)
        _type_specific(entry, key, group["type"])
        group["tension_only"] = (_bool(entry["tension_only"], f"{key}.tension_only")
                                 if "tension_only" in entry else False)
        ids = _string_array(_require(entry, "ids", key, "the array of member ids"), f"{key}.ids")
        group["ids"] = ids
        group["i"] = _string_array(_require(entry, "i", key, "the array of first nodes"), f"{key}.i", len(ids))
        group["j"] = _string_array(_require(entry, "j", key, "the array of last nodes"), f"{key}.j", len(ids))
        group["pretension_key"] = ((lambda k: f"{key}.pretension[{k}]") if isinstance(entry.get("pretension"), list)
                                   else (lambda k: f"{key}.pretension"))
        for name, kind, sign in (("length0", "length", "positive"), ("pretension", "force", None)):
            value = entry.get(name)
            if isinstance(value, list):
                values = _number_array(value, f"{key}.{name}", len(ids), "ids") * self.q.bare_factor(kind)
                if sign == "positive" and not (values > 0).all():
                    k = int(np.flatnonzero(~(values > 0))[0])
                    raise CaseError(f"{key}.{name}[{k}]", f"expected a positive value, found {_show(value[k])}")
                group[name] = values
            elif value is not None:
                group[name] = np.full(len(ids), self.quantity(value, kind, f"{key}.{name}", sign))
            else:
                group[name] = None
        return group

    def finish_member(self, rec, coords, tiny, sections, materials, length) -> Member:
        """The member of record ``rec``; ``length`` (m) between its end nodes."""
        key = rec["key"]
        a, b = rec["nodes"]
        pretension = rec["pretension"]
        if (rec["interior"] is None and rec["up"] is None and rec["type"] != "beam" and length > tiny
                and (pretension is None or pretension >= 0.0)):
            # the usual net member: nothing below applies to it (no interior
            # points, no beam section needs, no compression to check against EA)
            return Member(id=rec["id"], type=rec["type"], nodes=(a, b), section=rec["section"], key=key,
                          length0=rec["length0"], pretension=pretension, tension_only=rec["tension_only"],
                          divide=rec["divide"])
        if rec["interior"] is not None:  # given interior points: every element needs a length too
            chain = [coords[self.index[a]], *map(np.asarray, rec["interior"]), coords[self.index[b]]]
            pieces = np.linalg.norm(np.diff(np.asarray(chain), axis=0), axis=1)
            if pieces.min() <= tiny:
                raise CaseError(f"{key}.interior", f"two consecutive nodes of member \"{rec['id']}\" coincide "
                                "(zero-length element)")
        if length <= tiny:
            raise CaseError(f"{key}.nodes", f'zero length: nodes "{a}" and "{b}" coincide')
        section = sections[rec["section"]]
        self.check_strength(rec["type"], rec["tension_only"], rec["pretension"], section, materials,
                            key, lambda k: f"{key}.pretension")
        if rec["up"] is not None:
            axis = coords[self.index[b]] - coords[self.index[a]]
            up = np.asarray(rec["up"])
            if np.linalg.norm(np.cross(up, axis)) <= 1e-9 * np.linalg.norm(up) * np.linalg.norm(axis):
                raise CaseError(f"{key}.up", f"up = {list(rec['up'])} is parallel to the member axis "
                                f'"{a}" -> "{b}"; it must fix the direction of the local z axis')
        if rec["type"] == "beam":
            self.rotation_nodes.update((a, b, *interior_node_ids(rec["id"], rec["divide"])))
        return Member(id=rec["id"], type=rec["type"], nodes=(a, b), section=rec["section"], key=key,
                      length0=rec["length0"], pretension=rec["pretension"], tension_only=rec["tension_only"],
                      divide=rec["divide"], up=rec["up"], interior=rec["interior"])

    def check_strength(self, mtype, tension_only, pretension, section, materials, key, pretension_key):
        """Section needs of a member type, and a pretension the member can take.

        ``pretension`` is None, a float or an array (member table);
        ``pretension_key(k)`` is the key path of entry k.
        """
        if mtype == "beam":
            missing = [n for n in ("Iy", "Iz", "J") if getattr(section, n) is None]
            if missing:
                raise CaseError(f"{key}.section", f'section "{section.name}" has no {", ".join(missing)}: '
                                "beam members need Iy, Iz and J on their section")
        if pretension is None:
            return
        EA = materials[section.material].E * section.area
        if isinstance(pretension, float) and pretension >= 0.0 and 1.0 + pretension / EA > 0.0:
            return  # the usual single member, without building arrays (long-form nets have 10^4 of them)
        pretension = np.asarray(pretension, dtype=float)
        if mtype == "cable" or tension_only:
            bad = np.flatnonzero(pretension < 0)
            if bad.size:
                raise CaseError(pretension_key(int(bad[0])),
                                f"a {'cable' if mtype == 'cable' else 'tension-only bar'} cannot be pretensioned "
                                f"in compression, found {pretension.flat[bad[0]]:.6g} N")
        bad = np.flatnonzero(1.0 + pretension / EA <= 0)
        if bad.size:
            raise CaseError(pretension_key(int(bad[0])),
                            f"compression {pretension.flat[bad[0]]:.6g} N reaches EA = {EA:.6g} N: "
                            "no unstressed length gives it")

    def finish_group(self, group, coords, tiny, sections, materials) -> list[Member]:
        key = group["key"]
        rows = []
        for end in ("i", "j"):
            names = group[end]
            try:
                rows.append(np.fromiter(map(self.index.__getitem__, names), dtype=np.int64, count=len(names)))
            except KeyError as exc:
                k = names.index(exc.args[0])
                raise CaseError(f"{key}.{end}[{k}]", f'no node named "{names[k]}"'
                                + _suggest(names[k], self.index)) from None
        lengths = np.linalg.norm(coords[rows[1]] - coords[rows[0]], axis=1)
        bad = np.flatnonzero(lengths <= tiny)
        if bad.size:
            k = int(bad[0])
            a, b = group["i"][k], group["j"][k]
            what = f'both ends are node "{a}"' if a == b else f'nodes "{a}" and "{b}" coincide'
            raise CaseError(f"{key}.ids[{k}]", f'member "{group["ids"][k]}" has zero length: {what}')
        section = sections[group["section"]]
        self.check_strength(group["type"], group["tension_only"], group["pretension"], section, materials,
                            key, group["pretension_key"])
        n = len(group["ids"])
        if group["type"] == "beam":
            self.rotation_nodes.update(group["i"])
            self.rotation_nodes.update(group["j"])
        length0 = group["length0"].tolist() if group["length0"] is not None else [None] * n
        pretension = group["pretension"].tolist() if group["pretension"] is not None else [None] * n
        keys = [f"{key}.ids[{k}]" for k in range(n)]
        mtype, section_name, tension_only = group["type"], group["section"], group["tension_only"]
        with _collector_paused():
            return [Member(mid, mtype, (a, b), section_name, mkey, l0, pt, tension_only)
                    for mid, a, b, mkey, l0, pt in zip(group["ids"], group["i"], group["j"], keys,
                                                       length0, pretension)]

