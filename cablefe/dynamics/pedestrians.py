"""Comfort of a footbridge deck under a stream of pedestrians: a first estimate.

The method is the one of the JRC–ECCS footbridge guideline: Heinemeyer, C.,
Butz, C., Keil, A., Schlaich, M., Goldack, A., Trometer, S., Lukić, M.,
Chabrolin, B., Lemaire, A., Martin, P.-O., Cunha, Á., Caetano, E. (2009),
*Design of Lightweight Footbridges for Human Induced Vibrations*, JRC–ECCS
joint report EUR 23984 EN (section 4 and its annex on the harmonic load
model).  For one mode at a time:

1. the mode is *critical* when its frequency lies in a critical range of
   its direction (vertical and longitudinal walking, with the second
   harmonic for vertical motion; lateral walking);
2. a stream of ``n = S d`` pedestrians (loaded area ``S``, density ``d``)
   acts like ``n'`` perfectly synchronised pedestrians per m²:
   ``n' = 10.8 sqrt(xi n) / S`` for ``d < 1`` P/m² and
   ``n' = 1.85 sqrt(n) / S`` from 1 P/m² (xi the damping ratio);
3. the harmonic load per m² at the mode's frequency is ``P n' psi``, with
   ``P`` the force amplitude of one pedestrian in the mode's direction and
   ``psi(f)`` a reduction that is 1 in the middle of the critical range and
   0 outside it;
4. the load is applied on the lane in the sign of the mode (always pushing
   the way the mode moves), giving the modal force ``F* = p b ∫|mu| ds``
   over the lane (``b`` the walkway width, ``mu`` the mode scaled to 1 at
   its largest lane amplitude), and the steady-state resonant peak
   acceleration is ``a = F* / (2 xi M*)`` with ``M*`` the generalised mass
   of the same scaled mode;
5. the acceleration gives the comfort class 1 (maximum) to 4
   (unacceptable) by the limits of the mode's direction.

Every constant of the method is in :data:`CONSTANTS` below, with its source;
the case may set any of them in ``[modes.pedestrians]``.  The constants were
written from memory of the guideline (the guideline itself could not be
read while writing this module) and are marked so: check them against the
guideline and the governing code.  The result is a first estimate, to be
confirmed by the governing code, by a more detailed analysis and by
measurements on the built structure.
"""
from __future__ import annotations

from dataclasses import dataclass
from typing import Mapping

import numpy as np

SOURCE = ("Heinemeyer et al. (2009), Design of Lightweight Footbridges for Human Induced "
          "Vibrations, JRC-ECCS report EUR 23984 EN")


@dataclass(frozen=True)
class Constant:
    """One constant of the method.

    ``value`` is SI (N, Hz, m/s², pedestrians per m²), a number or nested
    lists of numbers; ``unit`` says which; ``source`` where it comes from.
    """

    value: object
    unit: str
    meaning: str
    source: str


_FM = SOURCE + "; from memory (guideline not read while writing), check it"

#: The guideline's constants (SI).  Keys are the names the case file uses in
#: ``[modes.pedestrians]``.  ``psi_*`` are piecewise-linear reductions given
#: as ``[frequency Hz, psi]`` corner points (0 outside the first and last);
#: ``critical_*`` are lists of ``[low, high]`` frequency ranges in Hz;
#: ``comfort_*`` the upper acceleration limits of comfort classes 1, 2, 3
#: (beyond the last: class 4).
CONSTANTS: Mapping[str, Constant] = {
    "force_vertical": Constant(280.0, "N", "force amplitude of one pedestrian, vertical", _FM),
    "force_longitudinal": Constant(140.0, "N", "force amplitude of one pedestrian, longitudinal", _FM),
    "force_lateral": Constant(35.0, "N", "force amplitude of one pedestrian, lateral", _FM),
    "sparse_coefficient": Constant(10.8, "1", "n' = c sqrt(xi n) / S below dense_density", _FM),
    "dense_coefficient": Constant(1.85, "1", "n' = c sqrt(n) / S from dense_density", _FM),
    "dense_density": Constant(1.0, "1/m^2", "density from which the dense-stream formula applies", _FM),
    "critical_vertical": Constant([[1.25, 2.3], [2.5, 4.6]], "Hz",
                                  "critical ranges, vertical (first and second harmonic)", _FM),
    "critical_longitudinal": Constant([[1.25, 2.3]], "Hz", "critical ranges, longitudinal", _FM),
    "critical_lateral": Constant([[0.5, 1.2]], "Hz", "critical ranges, lateral", _FM),
    "psi_vertical": Constant([[1.25, 0.0], [1.7, 1.0], [2.1, 1.0], [2.3, 0.0], [2.5, 0.0],
                              [3.4, 0.25], [4.2, 0.25], [4.6, 0.0]], "Hz, 1",
                             "reduction psi(f), vertical (second harmonic at 1/4)", _FM),
    "psi_longitudinal": Constant([[1.25, 0.0], [1.7, 1.0], [2.1, 1.0], [2.3, 0.0]], "Hz, 1",
                                 "reduction psi(f), longitudinal", _FM),
    "psi_lateral": Constant([[0.5, 0.0], [0.7, 1.0], [1.0, 1.0], [1.2, 0.0]], "Hz, 1",
                            "reduction psi(f), lateral", _FM),
    "comfort_vertical": Constant([0.5, 1.0, 2.5], "m/s^2",
                                 "upper limits of comfort classes 1-3, vertical", _FM),
    "comfort_lateral": Constant([0.1, 0.3, 0.8], "m/s^2",
                                "upper limits of comfort classes 1-3, lateral", _FM),
    "comfort_longitudinal": Constant([0.1, 0.3, 0.8], "m/s^2",
                                     "upper limits of comfort classes 1-3, longitudinal: the "
                                     "guideline's horizontal (lateral) limits, our choice", _FM),
    "lock_in_lateral": Constant(0.1, "m/s^2",
                                "lateral acceleration above which pedestrians may fall into step "
                                "with the deck (lock-in)", _FM),
}

#: direction each mode kind is loaded and judged in
DIRECTION_OF_KIND = {"vertical": "vertical", "torsional": "vertical",
                     "lateral": "lateral", "longitudinal": "longitudinal"}

CAVEAT = ("First estimate by the JRC-ECCS footbridge guideline's harmonic load model (" + SOURCE +
          "); its constants are listed with their source and were not checked against the "
          "guideline's text. The governing code, a more detailed analysis and measurements on the "
          "built structure decide.")


def constants(overrides: Mapping[str, object] | None = None) -> dict[str, object]:
    """The constants' values (SI) with the case's overrides applied."""
    values = {name: c.value for name, c in CONSTANTS.items()}
    for name, value in (overrides or {}).items():
        if name not in CONSTANTS:
            raise KeyError(f"unknown pedestrian constant {name!r} (known: {', '.join(CONSTANTS)})")
        values[name] = value
    return values


def reduction(frequency: float, corners) -> float:
    """psi at ``frequency`` (Hz) by linear interpolation of ``[f, psi]`` corners, 0 outside."""
    c = np.asarray(corners, dtype=float)
    if not c.size or frequency < c[0, 0] or frequency > c[-1, 0]:
        return 0.0
    return float(np.interp(frequency, c[:, 0], c[:, 1]))


def is_critical(frequency: float, ranges) -> bool:
    """True when ``frequency`` (Hz) lies in one of the ``[low, high]`` ranges."""
    return any(lo <= frequency <= hi for lo, hi in ranges)


def equivalent_pedestrians(area: float, density: float, damping: float, values) -> float:
    """n', equivalent synchronised pedestrians per m² on the loaded ``area`` (m²)."""
    n = area * density
    if density < values["dense_density"]:
        return values["sparse_coefficient"] * np.sqrt(damping * n) / area
    return values["dense_coefficient"] * np.sqrt(n) / area


def comfort_class(acceleration: float, limits) -> int:
    """1 (maximum comfort) … 4 (unacceptable) for a peak acceleration (m/s²)."""
    for k, limit in enumerate(limits):
        if acceleration <= limit:
            return k + 1
    return len(limits) + 1


def lane_integral(a: np.ndarray, b: np.ndarray, length: np.ndarray) -> float:
    """∫|u| ds over elements whose amplitude varies linearly from ``a`` to ``b``.

    Exact for the linear interpolation: ``L (|a| + |b|)/2`` when the ends
    have the same sign, ``L (a² + b²) / (2 (|a| + |b|))`` when the mode
    changes sign inside the element.
    """
    a, b, length = (np.asarray(v, dtype=float) for v in (a, b, length))
    same = a * b >= 0.0
    total = np.abs(a) + np.abs(b)
    safe = np.where(total > 0.0, total, 1.0)
    part = np.where(same, 0.5 * total, (a * a + b * b) / (2.0 * safe))
    return float(np.sum(length * part))


@dataclass(frozen=True)
class ComfortCheck:
    """The check of one mode (SI units).

    Attributes
    ----------
    direction : "vertical" | "lateral" | "longitudinal"
    critical : frequency in a critical range of that direction
    psi : reduction at the mode's frequency
    load : harmonic load per m² on the lane, N/m² (P n' psi)
    modal_force : F*, N, with the mode scaled to 1 at its largest lane amplitude
    modal_mass : M*, kg, of the same scaled mode
    acceleration : peak steady-state acceleration F*/(2 xi M*), m/s²
    comfort_class : 1 … 4
    lock_in : lateral modes: acceleration above the lock-in limit (None otherwise)
    """

    direction: str
    critical: bool
    psi: float
    load: float
    modal_force: float
    modal_mass: float
    acceleration: float
    comfort_class: int
    lock_in: bool | None


def check_mode(frequency: float, kind: str, lane_amplitude_integral: float, lane_peak: float,
               area: float, width: float, density: float, damping: float,
               values: Mapping[str, object]) -> ComfortCheck:
    """Resonant response of one mode to the pedestrian stream.

    Parameters
    ----------
    frequency : Hz
    kind : the mode's kind (decides the direction)
    lane_amplitude_integral : ∫|phi_d| ds over the lane, m²/√kg, for the
        mass-normalised mode (phi^T M phi = 1 kg) and its component ``phi_d``
        in the direction
    lane_peak : largest |phi_d| on the lane (same normalisation), m/√kg
    area : loaded area S = width × lane length, m²
    width : walkway width per lane line, m
    density : pedestrians per m²
    damping : damping ratio
    values : :func:`constants`
    """
    direction = DIRECTION_OF_KIND[kind]
    critical = is_critical(frequency, values[f"critical_{direction}"])
    psi = reduction(frequency, values[f"psi_{direction}"])
    n_eq = equivalent_pedestrians(area, density, damping, values)
    load = values[f"force_{direction}"] * n_eq * psi
    if lane_peak > 0.0:
        # scale the mode to 1 at its largest lane amplitude: M* = 1 / peak²
        modal_mass = 1.0 / lane_peak**2
        modal_force = load * width * lane_amplitude_integral / lane_peak
        acceleration = modal_force / (2.0 * damping * modal_mass)
    else:
        modal_mass, modal_force, acceleration = float("inf"), 0.0, 0.0
    limits = values[f"comfort_{direction}"]
    lock = acceleration > values["lock_in_lateral"] if direction == "lateral" else None
    return ComfortCheck(direction, critical, psi, load, modal_force, modal_mass, acceleration,
                        comfort_class(acceleration, limits), lock)
