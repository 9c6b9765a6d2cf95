"""Incident waves, far field, echo width and cross-section widths.

Glossary
--------
plane wave from phi_i
    ``u_inc = exp(+j k (x cos phi_i + y sin phi_i))``: it arrives from the
    direction ``phi_i`` (counter-clockwise from +x, the radar look
    direction) and travels toward ``phi_i + pi``.
line source at r_s
    ``u_inc = -(j/4) H0^(2)(k |r - r_s|)``, the free-space Green's function.
far-field amplitude F
    ``u_scat ~ F(phi) exp(-j k r) / sqrt(r)``. From the Green's
    representation and the large-argument form of H0^(2) (DLMF 10.17.6),
    ``F(phi) = e^(-j pi/4) / sqrt(8 pi k) * int (j k (r_hat.n) u - dudn) e^(j k r_hat.y) ds``.
echo width
    ``sigma_2D = 2 pi |F|^2`` in metres, also in dB re 1 m and re one wavelength.
scattering and extinction widths
    ``C_s = int |F|^2 dphi``; ``C_ext = -2 sqrt(2 pi / k) Re(e^(-j pi/4) F(phi_i + pi))``
    (the 2D optical theorem in this normalisation); absorption
    ``C_ext - C_s`` is zero for lossless bodies and positive for passive ones.
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from dataclasses import dataclass

import numpy as np
import scipy.special as sp
from numpy.typing import NDArray

from .mesh import PanelMesh
from .problem import MU0_H_M, FieldKind, IncidentWave

__all__ = [
    "CrossSections",
    "cross_sections",
    "FINITE_LENGTH_VALIDITY",
    "backscatter_density",
    "echo_width",
    "far_field",
    "far_field_each",
    "finite_length",
    "incident_field",
    "line_source_wave",
    "plane_wave",
    "surface_absorption",
    "surface_quantities",
]

FloatArray = NDArray[np.float64]
ComplexArray = NDArray[np.complex128]


def plane_wave(
    points: FloatArray, normals: FloatArray, k: complex, from_deg: FloatArray
) -> tuple[ComplexArray, ComplexArray]:
    """Plane waves from each angle: values and normal derivatives, shape ``(n, m)``."""
    phi = np.deg2rad(np.atleast_1d(np.asarray(from_deg, dtype=float)))
    d = np.stack([np.cos(phi), np.sin(phi)])  # (2, m)
    u = np.exp(1j * k * (points @ d))
    return u, 1j * k * (normals @ d) * u


def line_source_wave(
    points: FloatArray, normals: FloatArray, k: complex, source_m: FloatArray
) -> tuple[ComplexArray, ComplexArray]:
    """Cylindrical wave of a unit line source at ``source_m``: shape ``(n, 1)`` each."""
    diff = points - np.asarray(source_m, dtype=float)[None, :]
    r = np.hypot(diff[:, 0], diff[:, 1])
    u = -0.25j * sp.hankel2(0, k * r)
    g = 0.25j * k * sp.hankel2(1, k * r) / r
    dn = g * np.einsum("ij,ij->i", diff, normals)
    return u[:, None], dn[:, None]


def incident_field(
    incidents: Sequence[IncidentWave], points: FloatArray, normals: FloatArray, k: complex
) -> tuple[ComplexArray, ComplexArray]:
    """Incident field and its derivative along ``normals`` at ``points``, one column per wave."""
    u = np.empty((points.shape[0], len(incidents)), dtype=complex)
    dn = np.empty_like(u)
    plane = [i for i, w in enumerate(incidents) if w.is_plane]
    if plane:
        u[:, plane], dn[:, plane] = plane_wave(points, normals, k, np.array([incidents[i].from_deg for i in plane]))
    for i, w in enumerate(incidents):
        if not w.is_plane:
            assert w.position_m is not None
            a, b = line_source_wave(points, normals, k, np.array(w.position_m))
            u[:, [i]], dn[:, [i]] = a, b
    return u, dn


#: Far-field angles times nodes evaluated at once (about 64 MB of complex temporaries).
FAR_FIELD_BLOCK = 4_000_000


def far_field(
    mesh: PanelMesh, k: complex, u: ComplexArray, dudn: ComplexArray, angles_deg: FloatArray
) -> ComplexArray:
    """Far-field amplitude at ``angles_deg`` for each column of ``u, dudn``: ``(n_angles, m)``."""
    phi = np.deg2rad(np.asarray(angles_deg, dtype=float))
    const = np.exp(-0.25j * np.pi) / np.sqrt(8 * np.pi * k)
    w = mesh.weights
    out = np.empty((phi.size, u.shape[1]), dtype=complex)
    step = max(1, FAR_FIELD_BLOCK // max(mesh.n_nodes, 1))  # angles per block: bounded temporaries
    for lo in range(0, phi.size, step):
        part = phi[lo : lo + step]
        rhat = np.column_stack([np.cos(part), np.sin(part)])
        phase = np.exp(1j * k * (rhat @ mesh.nodes.T)) * w  # (a, n)
        proj = rhat @ mesh.normals.T
        out[lo : lo + step] = const * ((1j * k * proj * phase) @ u - phase @ dudn)
    return out


def far_field_each(
    mesh: PanelMesh, k: complex, u: ComplexArray, dudn: ComplexArray, angles_deg: FloatArray
) -> ComplexArray:
    """Far field of column ``m`` of ``u, dudn`` at its own angle ``angles_deg[m]``: shape ``(m,)``.

    The monostatic (backscatter) and forward amplitudes need one angle per
    incident wave, not every angle for every wave.
    """
    phi = np.deg2rad(np.asarray(angles_deg, dtype=float))
    rhat = np.column_stack([np.cos(phi), np.sin(phi)])
    phase = np.exp(1j * k * (rhat @ mesh.nodes.T)) * mesh.weights  # (m, n)
    proj = rhat @ mesh.normals.T
    const = np.exp(-0.25j * np.pi) / np.sqrt(8 * np.pi * k)
    return const * np.einsum("mn,nm->m", phase, 1j * k * proj.T * u - dudn)


#: Validity of ``finite_length``, in words for the outputs.
FINITE_LENGTH_VALIDITY = (
    "sigma_3D = 2 L^2 sigma_2D / lambda: a straight uniform body of length L seen broadside (incidence "
    "and observation normal to its axis), valid for L much larger than the wavelength and than the "
    "cross-section (Knott, Shaeffer and Tuley, Radar Cross Section, 2nd ed.); end effects and any "
    "bending or tilt are not included; an engineering estimate"
)


def finite_length(echo_width_m: FloatArray, wavelength_m: float, length_m: float) -> dict[str, FloatArray]:
    """Broadside 3D cross-section of a body ``length_m`` long from its 2D echo width.

    ``sigma_3D = 2 L^2 sigma_2D / lambda`` (Knott, Shaeffer and Tuley, Radar
    Cross Section, 2nd ed.): ``m2`` and ``dbsm`` (dB re 1 m^2); for sound,
    the target strength ``ts_db = 10 log10(sigma_3D / (4 pi))`` dB re 1 m
    (Urick, Principles of Underwater Sound). A rigid circular cylinder of
    radius ``a`` at high ``ka`` has ``sigma_2D -> pi a``, so
    ``TS -> 10 log10(a L^2 / (2 lambda))``, Urick's broadside formula.
    """
    sigma = 2.0 * length_m**2 * np.asarray(echo_width_m, dtype=float) / wavelength_m
    with np.errstate(divide="ignore"):
        dbsm = 10 * np.log10(sigma)
        ts = 10 * np.log10(sigma / (4 * np.pi))
    return {"m2": sigma, "dbsm": dbsm, "ts_db": ts}


def backscatter_density(
    mesh: PanelMesh, k: complex, u: ComplexArray, dudn: ComplexArray, from_deg: FloatArray
) -> ComplexArray:
    """Where the echo comes from: the far-field integrand at each wave's backscatter direction.

    Column ``m`` holds, per unit length of boundary (sqrt(m) per m), the
    contribution of each node to the backscattered far field of the plane
    wave from ``from_deg[m]``: ``sum_i density[i, m] w_i`` is that wave's
    monostatic far field (``far_field_each``), so summing it over a body or
    a layer gives that part's share of the echo.
    """
    phi = np.deg2rad(np.asarray(from_deg, dtype=float))
    rhat = np.column_stack([np.cos(phi), np.sin(phi)])
    phase = np.exp(1j * k * (mesh.nodes @ rhat.T))  # (n, m)
    proj = mesh.normals @ rhat.T
    const = np.exp(-0.25j * np.pi) / np.sqrt(8 * np.pi * k)
    return const * (1j * k * proj * phase * u - phase * dudn)


def echo_width(farfield: ComplexArray, wavelength_m: float) -> dict[str, FloatArray]:
    """Echo width in m (``m``), dB re 1 m (``db_m``) and dB re one wavelength (``db_lambda``).

    An exactly zero far field gives ``-inf`` dB; writers floor it at ``conventions.DB_FLOOR``.
    """
    sigma = 2 * np.pi * np.abs(farfield) ** 2
    with np.errstate(divide="ignore"):
        db_m = 10 * np.log10(sigma)
    return {"m": sigma, "db_m": db_m, "db_lambda": db_m - 10 * np.log10(wavelength_m)}


@dataclass(frozen=True)
class CrossSections:
    """Widths (m) per plane-wave incidence and the optical-theorem residual.

    ``absorption_width_m`` is ``C_ext - C_s``; ``surface_absorption_m`` is
    the power flowing into the bodies through their surfaces, computed
    independently; ``optical_residual`` compares the two (see ``cross_sections``).
    """

    from_deg: FloatArray
    scattering_width_m: FloatArray
    extinction_width_m: FloatArray
    absorption_width_m: FloatArray
    surface_absorption_m: FloatArray
    optical_residual: FloatArray

    def with_surface_absorption(self, c_abs: FloatArray) -> CrossSections:
        """The same widths with the surface absorption (and so the residual) computed elsewhere."""
        scale = np.maximum(np.abs(self.extinction_width_m), 1e-300)
        residual = np.abs(self.extinction_width_m - self.scattering_width_m - c_abs) / scale
        return CrossSections(self.from_deg, self.scattering_width_m, self.extinction_width_m,
                             self.absorption_width_m, np.asarray(c_abs, dtype=float), residual)

    def widths(self) -> dict[str, FloatArray]:
        """The widths and the residual keyed by their names in the summary."""
        return {
            "scattering_width_m": self.scattering_width_m,
            "extinction_width_m": self.extinction_width_m,
            "absorption_width_m": self.absorption_width_m,
            "surface_absorption_m": self.surface_absorption_m,
            "optical_residual": self.optical_residual,
        }


def cross_sections(
    mesh: PanelMesh, k: complex, u: ComplexArray, dudn: ComplexArray, from_deg: FloatArray
) -> CrossSections:
    """Scattering, extinction and absorption widths (m) and the optical-theorem residual.

    ``C_s`` uses the trapezoidal rule on an angle grid fine enough for the
    body's electrical size (spectrally accurate for periodic integrands).
    The ``optical_residual`` is ``|C_ext - C_s - C_abs| / C_ext`` with the
    absorption ``C_abs`` computed independently from the surface power
    flux ``Im(int conj(u) dudn ds) / k``; for lossless bodies ``C_abs = 0``.
    """
    radius = float(np.max(np.hypot(*(mesh.nodes - mesh.nodes.mean(axis=0)).T)))
    n_ang = int(max(64, 2 * int(abs(k) * radius) + 64))
    n_ang += n_ang % 2
    grid = np.arange(n_ang) * 360.0 / n_ang
    ff = far_field(mesh, k, u, dudn, grid)
    c_s = np.sum(np.abs(ff) ** 2, axis=0) * (2 * np.pi / n_ang)
    fwd = far_field_each(mesh, k, u, dudn, np.asarray(from_deg, dtype=float) + 180.0)
    c_ext = -2 * np.sqrt(2 * np.pi / abs(k)) * np.real(np.exp(-0.25j * np.pi) * fwd)
    c_abs = surface_absorption(mesh, k, u, dudn)
    scale = np.maximum(np.abs(c_ext), 1e-300)
    residual = np.abs(c_ext - c_s - c_abs) / scale
    return CrossSections(np.asarray(from_deg, dtype=float), c_s, c_ext, c_ext - c_s, c_abs, residual)


def surface_absorption(mesh: PanelMesh, k: complex, u: ComplexArray, dudn: ComplexArray) -> FloatArray:
    """Power flowing into the bodies through their surfaces, as a width (m), per column.

    Time-averaged intensity for exp(+j w t) is ``-Im(conj(u) grad u) / k`` in
    units of the incident plane wave's; with n out of the body the inflow is
    ``+Im(int conj(u) du/dn ds) / k``.
    """
    return np.imag(np.sum(np.conj(u) * dudn * mesh.weights[:, None], axis=0)) / abs(k)


def surface_quantities(
    field: FieldKind, frequency_hz: float, u: ComplexArray, dudn: ComplexArray, density_kg_m3: float
) -> dict[str, ComplexArray]:
    """The trade's surface quantities for a unit-amplitude incident wave, keyed by name and unit.

    TM (u = E_z, 1 V/m): surface current ``J_z = (du/dn) / (j w mu0)`` in A/m.
    TE (u = H_z, 1 A/m): surface current along the contour ``J_t = -H_z`` in A/m.
    Sound (u = p, 1 Pa): surface pressure ``p`` in Pa and the normal particle
    velocity ``v_n = -(dp/dn) / (j w rho)`` in m/s (out of the body).
    """
    omega = 2 * math.pi * frequency_hz
    if field == "tm":
        return {"current_z_a_per_m": dudn / (1j * omega * MU0_H_M)}
    if field == "te":
        return {"current_t_a_per_m": -u}
    return {
        "pressure_pa": u,
        "normal_velocity_m_per_s": -dudn / (1j * omega * density_kg_m3),
    }
