"""Small invented models for the study tests (TOML text)."""
from __future__ import annotations

import numpy as np


def deck_case(studies: str = "", tolerance: float = 1e-10, live: str = "") -> str:
    """A 24 m deck of beams hung from one cable by six bar hangers, in the xz plane."""
    xs = np.arange(0, 25, 4.0)
    z = 10.0 - 3.0 * 4 * (xs / 24) * (1 - xs / 24)
    nodes = "\n".join([f'C{k} = [{x}, 0, {zz:.6f}]' for k, (x, zz) in enumerate(zip(xs, z))]
                      + [f'D{k} = [{x}, 0, 4.0]' for k, x in enumerate(xs)])
    sup = ['C0 = "all"', 'C6 = "all"', 'D0 = "x y z rx rz"', 'D6 = "y z rx rz"']
    sup += [f'C{k} = "y"' for k in range(1, 6)] + [f'D{k} = "y rx rz"' for k in range(1, 6)]
    mem = []
    for k in range(6):
        mem.append(f'[[members]]\nid = "MC{k}"\ntype = "cable"\nnodes = ["C{k}", "C{k + 1}"]\nsection = "main"\n')
        mem.append(f'[[members]]\nid = "D{k}-{k + 1}"\ntype = "beam"\nnodes = ["D{k}", "D{k + 1}"]\nsection = "deck"\n')
    for k in range(1, 6):
        mem.append(f'[[members]]\nid = "H{k}"\ntype = "bar"\nnodes = ["C{k}", "D{k}"]\nsection = "hanger"\n')
    return f"""
title = "study test deck"
[units]
length = "m"
force = "kN"
[materials.steel]
E = "200 GPa"
unit_weight = "78.5 kN/m^3"
[sections.main]
material = "steel"
area = "3000 mm^2"
[sections.hanger]
material = "steel"
area = "800 mm^2"
[sections.deck]
material = "steel"
area = "12000 mm^2"
Iy = "2e8 mm^4"
Iz = "2e8 mm^4"
J = "1e8 mm^4"
[nodes]
{nodes}
[supports]
{chr(10).join(sup)}
{chr(10).join(mem)}
[[loads]]
case = "dead"
self_weight = true
[[loads]]
case = "deck"
members = ["D*"]
per_length = [0, 0, -8]
{live}
[[combinations]]
name = "permanent"
factors = {{ dead = 1.0, deck = 1.0 }}
{studies}
[analysis]
increments = 4
tolerance = {tolerance}
solver = "superlu"
"""


LANE = '["D0", "D1", "D2", "D3", "D4", "D5", "D6"]'
