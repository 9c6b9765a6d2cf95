"""Conventions shared by the engine, the face and every writer.

Glossary
--------
engineering convention
    Time factor exp(+j w t), the one used everywhere inside sectionwave;
    outgoing waves use H^(2) and ``G = -(j/4) H0^(2)(k r)``.
physics convention
    Time factor exp(-i w t). A phasor in this convention is the complex
    conjugate of the same physical field in the engineering convention; it
    is offered only when results are exported.
dB floor
    The lowest level written for a logarithmic quantity (20 log10 |u| or
    10 log10 of an echo width): an exact zero maps here instead of to
    -inf, which viewers and spreadsheets cannot scale to.
"""

from __future__ import annotations

from typing import Literal

__all__ = [
    "CONVENTION_TEXT", "DB_FLOOR", "FIELD_DESCRIPTION", "FIELD_WORDS", "TIME_CONVENTIONS", "TimeConvention"]

TimeConvention = Literal["engineering", "physics"]

#: Accepted names of the time convention of exported phasors (the first is the engine's own).
TIME_CONVENTIONS: tuple[TimeConvention, ...] = ("engineering", "physics")

#: Lowest dB level written anywhere (fields, echo widths, plots).
DB_FLOOR = -400.0

#: The conventions in words, as every summary states them.
CONVENTION_TEXT = {
    "green_function": "G = -(j/4) H0^(2)(k r)",
    "incident_plane_wave": "u_inc = exp(+j k (x cos phi_i + y sin phi_i)), arriving from phi_i",
    "far_field": "u_scat ~ F(phi) exp(-j k r) / sqrt(r)",
    "echo_width": "sigma_2D = 2 pi |F|^2",
    "angles": "degrees, counter-clockwise from +x",
    "normals": "out of the body",
}


#: Per field kind: its short name, the symbol of ``u`` and, in words, what ``u`` is.
FIELD_WORDS = {
    "tm": ("TM", "E_z", "electric field along the body's axis"),
    "te": ("TE", "H_z", "magnetic field along the body's axis"),
    "acoustic": ("sound", "p", "acoustic pressure"),
}
#: Every output that carries a field says in words what it is.
FIELD_DESCRIPTION = {kind: f"{code}: {words} (u = {symbol})" for kind, (code, symbol, words) in FIELD_WORDS.items()}
