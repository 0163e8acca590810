"""Building the model: :func:`build_model` turns a validated case into
node coordinates, the DOF table, element tables (undivided bars and cables
in one batch, the rest member by member) and load vectors.
"""

from __future__ import annotations

import logging
from types import MappingProxyType
from typing import Mapping

import numpy as np

from ..errors import CaseError
from ..spec import CaseSpec
from .geometry import _beam_reference, _default_up, interior_start, local_origin
from .loads import _build_loads
from .report import model_warnings, report_deck_nodes
from .tables import FAMILIES, ElementTable, MemberInfo, Model

log = logging.getLogger(__name__)


def _section_data(spec: CaseSpec, member, key):
    try:
        sec = spec.sections[member.section]
    except KeyError:
        raise CaseError(f"{key}.section", f'no section named "{member.section}" '
                        f'(known: {", ".join(spec.sections)})') from None
    try:
        mat = spec.materials[sec.material]
    except KeyError:
        raise CaseError(f"sections.{sec.name}.material", f'no material named "{sec.material}" '
                        f'(known: {", ".join(spec.materials)})') from None
    weight = sec.weight if sec.weight is not None else sec.area * mat.unit_weight
    return sec, mat, weight


def build_model(spec: CaseSpec) -> Model:
    """Turn a validated case into arrays.

    Raises
    ------
    CaseError
        For problems only visible with the geometry (zero-length members,
        beam ``up`` parallel to the member, loads on missing paths).
    """
    node_ids = list(spec.nodes)
    site = np.array([spec.nodes[n] for n in node_ids], dtype=float).reshape(-1, 3)
    origin = local_origin(site)
    # every position below is local (relative to ``origin``): see Model
    coords = [tuple(p) for p in (site - origin).tolist()]
    index = {n: k for k, n in enumerate(node_ids)}
    reference = spec.beam_reference

    # -- members and their elements -----------------------------------------
    columns_of: dict[str, dict[str, list]] = {f: {"nodes": [], "member": [], "L0": [], "EA": [],
                                                  "weight": [], "alpha": [], "tension_only": [],
                                                  "breaking_load": [], "E": [], "G": [], "A": [],
                                                  "Iy": [], "Iz": [], "J": [], "up": []}
                                              for f in FAMILIES}
    # undivided bars and cables without a problem are done in one batch; the
    # loop below does the rest (and raises the same errors as ever, in order)
    straight = _straight_members(spec, index, coords)
    infos: dict[int, tuple] = {}
    for m_idx, mem in enumerate(spec.members):
        if straight["take"][m_idx]:
            continue
        key = mem.key or f"members[{m_idx}]"
        sec, mat, weight = _section_data(spec, mem, key)
        a, b = mem.nodes
        for end, name in zip(("nodes[0]", "nodes[1]"), (a, b)):
            if name not in index:
                raise CaseError(f"{key}.nodes", f'no node named "{name}"')
        xa, xb = np.array(coords[index[a]]), np.array(coords[index[b]])
        chord = float(np.linalg.norm(xb - xa))
        if chord <= 0.0:
            raise CaseError(f"{key}.nodes", f'zero length: nodes "{a}" and "{b}" coincide')
        n = int(mem.divide)
        chain = [index[a]]
        start = interior_start(mem, xa, xb, origin, weight, mat.E * sec.area)
        for k in range(1, n):
            nid = f"{mem.id}.{k}"
            if nid in index:
                raise CaseError(f"{key}.divide", f'interior node "{nid}" clashes with a node of that name')
            index[nid] = len(node_ids)
            node_ids.append(nid)
            coords.append(tuple(start[k - 1]))
            chain.append(index[nid])
        chain.append(index[b])
        family = mem.type
        EA = mat.E * sec.area
        if mem.type in ("cable", "bar"):
            if mem.length0 is not None:
                L0 = mem.length0
            elif mem.pretension is not None:
                L0 = chord / (1.0 + mem.pretension / EA)
            else:
                L0 = chord
        else:
            L0 = chord
        columns = columns_of[family]
        if family == "beam":
            # a beam is stress-free as drawn (or at its [beam_reference]
            # positions): each element's reference length is its own chord
            # there (given interior points need not be evenly spaced)
            pts = np.array([np.subtract(reference[node_ids[c]].position, origin) if node_ids[c] in reference
                            else coords[c] for c in chain], dtype=float)
            if (pieces := np.linalg.norm(np.diff(pts, axis=0), axis=1)).min() <= 0.0:
                raise CaseError("beam_reference", f'beam member "{mem.id}": two consecutive nodes have the '
                                "same stress-free position (zero-length element)")
        else:
            pieces = np.full(n, L0 / n)
        for k in range(n):
            columns["nodes"].append((chain[k], chain[k + 1]))
            columns["member"].append(m_idx)
            columns["L0"].append(float(pieces[k]))
            columns["EA"].append(EA)
            columns["weight"].append(weight)
            columns["alpha"].append(mat.alpha)
            columns["tension_only"].append(bool(mem.tension_only) or family == "cable")
            columns["breaking_load"].append(np.nan if sec.breaking_load is None else sec.breaking_load)
            if family == "beam":
                for name in ("Iy", "Iz", "J"):
                    if getattr(sec, name) is None:
                        raise CaseError(f"sections.{sec.name}.{name}",
                                        f"beam member {mem.id} needs {name} on its section")
                columns["E"].append(mat.E)
                columns["G"].append(mat.G)
                columns["A"].append(sec.area)
                columns["Iy"].append(sec.Iy)
                columns["Iz"].append(sec.Iz)
                columns["J"].append(sec.J)
                columns["up"].append(mem.up)
        infos[m_idx] = (family, n, tuple(node_ids[c] for c in chain), key)
    members = _merge_straight(spec, columns_of, straight, infos)

    coordinates = np.array(coords, dtype=float).reshape(-1, 3)
    nn = len(node_ids)

    # -- DOF numbering: rotations only where beams touch ---------------------
    rot = np.zeros(nn, dtype=bool)
    bt = columns_of["beam"]["nodes"]
    if len(bt):
        rot[np.asarray(bt).ravel()] = True
    active = np.zeros(nn, dtype=bool)
    for f in FAMILIES:
        if len(columns_of[f]["nodes"]):
            active[np.asarray(columns_of[f]["nodes"]).ravel()] = True
    has = np.zeros((nn, 6), dtype=bool)
    has[:, :3] = True
    has[:, 3:] = rot[:, None]
    dof = -np.ones((nn, 6), dtype=np.int64)
    dof[has] = np.arange(int(has.sum()))
    ndof = int(has.sum())
    reference_coordinates, initial_rotations = _beam_reference(spec, index, coordinates, rot, origin)

    supported = np.zeros(ndof, dtype=bool)
    for nid, mask in spec.supports.items():
        if nid not in index:
            raise CaseError(f"supports.{nid}", f'no node named "{nid}"')
        g = dof[index[nid]][np.asarray(mask, dtype=bool)]
        supported[g[g >= 0]] = True
    restrained = supported.copy()
    lonely = np.flatnonzero(~active)
    if lonely.size:
        loose = [node_ids[k] for k in lonely if node_ids[k] not in spec.supports]
        if loose:
            log.warning("nodes joined to no member are held fixed: %s", ", ".join(loose[:10]))
        g = dof[lonely].ravel()
        restrained[g[g >= 0]] = True

    # -- element tables --------------------------------------------------------
    families = {}
    for f in FAMILIES:
        columns = columns_of[f]
        nodes = np.asarray(columns["nodes"], dtype=np.int64).reshape(-1, 2)
        k = 6 if f == "beam" else 3
        dofs = np.concatenate([dof[nodes[:, 0], :k], dof[nodes[:, 1], :k]], axis=1) if len(nodes) \
            else np.zeros((0, 2 * k), dtype=np.int64)
        props = {
            "EA": np.asarray(columns["EA"], dtype=float),
            "unstressed_length": np.asarray(columns["L0"], dtype=float),
            "weight": np.asarray(columns["weight"], dtype=float),
            "alpha": np.asarray(columns["alpha"], dtype=float),
            "tension_only": np.asarray(columns["tension_only"], dtype=bool),
            "breaking_load": np.asarray(columns["breaking_load"], dtype=float),
        }
        if f == "beam":
            from ..elements.beam.frames import local_frames
            for name in ("E", "G", "A", "Iy", "Iz", "J"):
                props[name] = np.asarray(columns[name], dtype=float)
            xi, xj = reference_coordinates[nodes[:, 0]], reference_coordinates[nodes[:, 1]]
            props["length"] = np.linalg.norm(xj - xi, axis=1)
            ups = columns["up"]
            up = None
            if any(u is not None for u in ups):
                up = np.array([u if u is not None else _default_up(a, b) for u, a, b in zip(ups, xi, xj)])
            try:
                props["frame0"] = local_frames(xi, xj, up) if len(nodes) else np.zeros((0, 3, 3))
            except ValueError as exc:
                if up is None:  # the default up is never parallel: a geometry problem
                    raise CaseError("members", f"beam elements: {exc}") from None
                # name the member: the element whose up vector is most nearly
                # along its axis is the one the kernel refused
                ex = (xj - xi) / np.linalg.norm(xj - xi, axis=1)[:, None]
                un = up / np.linalg.norm(up, axis=1)[:, None]
                e = int(np.argmin(np.linalg.norm(np.cross(ex, un), axis=1)))
                mem = spec.members[int(columns["member"][e])]
                key = mem.key or f"members[{int(columns['member'][e])}]"
                raise CaseError(f"{key}.up", f"up = {[float(v) for v in up[e]]} of beam member \"{mem.id}\" "
                                f"is parallel to its axis {ex[e].round(6).tolist()}; it must fix the "
                                "direction of the local z axis, so choose a vector across the member") from None
        families[f] = ElementTable(f, nodes, np.asarray(columns["member"], dtype=np.int64), dofs,
                                   MappingProxyType(props))

    model = Model(spec=spec, node_ids=tuple(node_ids), node_index=MappingProxyType(index),
                  coordinates=coordinates, dof=dof, restrained=restrained, supported=supported,
                  families=MappingProxyType(families), members=tuple(members),
                  member_index=MappingProxyType({m.id: k for k, m in enumerate(members)}),
                  load_cases=MappingProxyType({}), reference_coordinates=reference_coordinates,
                  initial_rotations=initial_rotations, origin=origin)
    cases = _build_loads(spec, model)
    combos = tuple((c.name, MappingProxyType(dict(c.factors))) for c in spec.combinations)
    from dataclasses import replace
    model = replace(model, load_cases=MappingProxyType(cases), combinations=combos)
    report_deck_nodes(model)   # fail at build time, not after the analysis
    notes = model_warnings(model)
    for w in notes:
        # info only: form-finding builds many models; ``check`` prints these
        # and every result repeats them in its warnings
        log.info(w)
    return replace(model, warnings=tuple(notes)) if notes else model


#: nodes closer than this fraction of the model's size are taken as one point


_STRAIGHT_FIELDS = ("nodes", "member", "L0", "EA", "weight", "alpha", "tension_only", "breaking_load")


def _straight_members(spec: CaseSpec, index: Mapping[str, int], coords: list) -> dict:
    """Element data of the undivided bars and cables, in one batch.

    Big models (cable nets) are mostly such members; a Python pass per
    member costs ~15 us, the batch below ~1 us.  A member with any problem
    (unknown section or node, zero length) is left to the loop of
    :func:`build_model`, which raises the error for it in member order.

    Returns
    -------
    dict
        ``take`` (nm,) bool, the members done here; ``family`` -> dict of
        arrays named as :data:`_STRAIGHT_FIELDS` (one element per member).
    """
    mems = spec.members
    nm = len(mems)
    take = np.zeros(nm, dtype=bool)
    out = {"take": take}
    cand = np.fromiter((m.divide == 1 and m.interior is None and m.type in ("bar", "cable")
                        for m in mems), dtype=bool, count=nm)
    sections = {}
    for name in {m.section for m in mems}:
        sec = spec.sections.get(name)
        mat = None if sec is None else spec.materials.get(sec.material)
        sections[name] = None if mat is None else (sec, mat, sec.weight if sec.weight is not None
                                                   else sec.area * mat.unit_weight)
    code_of = {name: k for k, name in enumerate(sections)}
    table = [sections[name] for name in code_of]
    ok_section = np.array([v is not None for v in table] + [False])
    code = np.fromiter((code_of[m.section] for m in mems), dtype=np.int64, count=nm)
    ia = np.fromiter((index.get(m.nodes[0], -1) for m in mems), dtype=np.int64, count=nm)
    ib = np.fromiter((index.get(m.nodes[1], -1) for m in mems), dtype=np.int64, count=nm)
    xyz = np.asarray(coords, dtype=float).reshape(-1, 3)
    found = (ia >= 0) & (ib >= 0)
    d = np.where(found[:, None], xyz[np.maximum(ib, 0)] - xyz[np.maximum(ia, 0)], 0.0)
    chord = np.sqrt(np.einsum("ij,ij->i", d, d))
    take[:] = cand & ok_section[code] & found & (chord > 0.0)
    if not take.any():
        return out

    def column(values):
        return np.array([np.nan if v is None else v for v in values], dtype=float)

    def prop(fn):
        return np.array([fn(*v) if v is not None else np.nan for v in table], dtype=float)

    EA_s, w_s, alpha_s = prop(lambda s, m, w: m.E * s.area), prop(lambda s, m, w: w), prop(lambda s, m, w: m.alpha)
    brk_s = prop(lambda s, m, w: np.nan if s.breaking_load is None else s.breaking_load)
    for family in ("bar", "cable"):
        rows = np.flatnonzero(take & np.fromiter((m.type == family for m in mems), dtype=bool, count=nm))
        if not rows.size:
            continue
        picked = [mems[k] for k in rows]
        c = code[rows]
        EA = EA_s[c]
        length0 = column([m.length0 for m in picked])
        pretension = column([m.pretension for m in picked])
        L0 = np.where(~np.isnan(length0), length0,
                      np.where(~np.isnan(pretension), chord[rows] / (1.0 + pretension / EA), chord[rows]))
        tension_only = (np.ones(rows.size, dtype=bool) if family == "cable"
                        else np.fromiter((bool(m.tension_only) for m in picked), dtype=bool, count=rows.size))
        out[family] = {"nodes": np.stack([ia[rows], ib[rows]], axis=1), "member": rows, "L0": L0,
                       "EA": EA, "weight": w_s[c], "alpha": alpha_s[c], "tension_only": tension_only,
                       "breaking_load": brk_s[c]}
    return out


def _merge_straight(spec: CaseSpec, columns_of: dict, straight: dict, infos: dict) -> list:
    """Put the batched elements among the looped ones in member order.

    ``columns_of`` is updated in place (lists become arrays); returns the
    :class:`MemberInfo` of every member.
    """
    first = np.zeros(len(spec.members), dtype=np.int64)
    for f in FAMILIES:
        batch = straight.get(f)
        if batch is None:
            continue
        columns = columns_of[f]
        looped = len(columns["member"])
        for name in _STRAIGHT_FIELDS:
            mine = np.asarray(columns[name]).reshape((looped, 2) if name == "nodes" else (looped,))
            columns[name] = np.concatenate([mine.astype(batch[name].dtype), batch[name]])
        order = np.argsort(columns["member"], kind="stable")   # elements of a member stay in order
        for name in _STRAIGHT_FIELDS:
            columns[name] = columns[name][order]
    for f in FAMILIES:
        owner = np.asarray(columns_of[f]["member"], dtype=np.int64)
        if owner.size:
            starts = np.flatnonzero(np.r_[True, owner[1:] != owner[:-1]])
            first[owner[starts]] = starts
    members = []
    take = straight["take"]
    for m_idx, mem in enumerate(spec.members):
        if take[m_idx]:
            members.append(MemberInfo(mem.id, mem.type, mem.section, mem.type, int(first[m_idx]), 1,
                                      tuple(mem.nodes), mem.key or f"members[{m_idx}]"))
        else:
            family, n, chain, key = infos[m_idx]
            members.append(MemberInfo(mem.id, mem.type, mem.section, family, int(first[m_idx]), n,
                                      chain, key))
    return members
