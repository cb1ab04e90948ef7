"""Amplitude variation with offset (AVO) at a single interface.

Exact and linearised P-P plane-wave reflection coefficients at the boundary
between two isotropic elastic half-spaces, the intercept/gradient pair of the
two-term approximation, the AVO class of an (intercept, gradient) pair, and
the impedances used with inversion data.

Conventions shared by every function:

* layer 1 is above, layer 2 below; arguments come as ``vp1, vs1, rho1, vp2,
  vs2, rho2``;
* velocity in m/s, density in g/cm3, angle of incidence in degrees, measured
  from the interface normal in layer 1;
* reflection coefficients are displacement-amplitude ratios with the sign
  convention of Aki & Richards (1980): at normal incidence
  ``Rpp = (I2 - I1) / (I2 + I1)`` with ``I = vp * rho``;
* every function broadcasts its arguments against each other with numpy rules.

Input checks (``ValueError`` naming the argument and the allowed range):
``vp`` within ``[VP_MIN_M_S, VP_MAX_M_S]`` (rejects velocities given in km/s),
``vs`` above 0 and at most ``VS_VP_MAX * vp`` (a non-negative bulk modulus),
density above 0 and at most ``RHO_MAX_G_CM3`` (rejects kg/m3), angle within
``[0, ANGLE_MAX_DEG]``. Shear velocity must be positive in both layers: a
fluid layer (water over rock) is outside this module.
"""

from __future__ import annotations

from typing import NamedTuple

import numpy as np
from numpy.typing import ArrayLike, NDArray

from ._checks import FloatArray, as_finite, in_range

#: Lowest accepted P velocity, m/s. Gas at surface conditions is about 260-450 m/s
#: (from memory); anything below 100 m/s is taken to be a unit slip (km/s).
VP_MIN_M_S = 100.0
#: Highest accepted P velocity, m/s; diamond, the fastest natural solid, is about
#: 18 000 m/s (from memory).
VP_MAX_M_S = 20_000.0
#: Largest accepted Vs/Vp: K = rho (vp^2 - 4/3 vs^2) >= 0 requires vs/vp <= sqrt(3)/2.
VS_VP_MAX = float(np.sqrt(3.0) / 2.0)
#: Highest accepted density, g/cm3; osmium, the densest element, is 22.6 g/cm3
#: (from memory), so larger numbers are taken to be kg/m3.
RHO_MAX_G_CM3 = 25.0
#: Largest accepted angle of incidence, degrees (90 is grazing incidence, where every
#: interface reflects with Rpp = -1 and the linearised forms diverge).
ANGLE_MAX_DEG = 89.0

#: |intercept| at or below which the impedance contrast counts as near zero (class II).
#: Rutherford & Williams (1989) describe class 2 as "near-zero impedance contrast"
#: without a number; 0.02 is common practice.
NEAR_ZERO_INTERCEPT = 0.02
#: Angle, degrees, within which a polarity reversal makes a near-zero, positive
#: intercept class IIp (Ross & Kinman 1995 describe the reversal at near to mid
#: offsets; 30 degrees, the usual limit of two-term AVO, is common practice).
REFERENCE_ANGLE_DEG = 30.0
#: AVO class labels returned by :func:`avo_class`.
AVO_CLASS_LABELS = ("I", "IIp", "II", "III", "IV")


class InterceptGradient(NamedTuple):
    """Two-term AVO attributes, ``R(theta) ~ intercept + gradient * sin^2(theta)``."""

    intercept: FloatArray
    gradient: FloatArray


class _Layers(NamedTuple):
    vp1: FloatArray
    vs1: FloatArray
    rho1: FloatArray
    vp2: FloatArray
    vs2: FloatArray
    rho2: FloatArray


def _velocity_p(name: str, value: ArrayLike) -> FloatArray:
    return in_range(name, value, VP_MIN_M_S, VP_MAX_M_S, unit="m/s")


def _velocity_s(name: str, value: ArrayLike, vp: FloatArray, vp_name: str) -> FloatArray:
    vs = in_range(name, value, 0.0, VP_MAX_M_S, unit="m/s", low_open=True)
    ratio = vs / vp
    too_fast = ratio > VS_VP_MAX
    if np.any(too_fast):
        worst = float(np.ravel(ratio[too_fast])[0]) if ratio.ndim else float(ratio)
        raise ValueError(
            f"{name} must be at most {VS_VP_MAX:.4f} * {vp_name} (bulk modulus >= 0)"
            f" (got {name}/{vp_name} = {worst:.4f})"
        )
    return vs


def _density(name: str, value: ArrayLike) -> FloatArray:
    return in_range(name, value, 0.0, RHO_MAX_G_CM3, unit="g/cm3", low_open=True)


def _layers(
    vp1: ArrayLike,
    vs1: ArrayLike,
    rho1: ArrayLike,
    vp2: ArrayLike,
    vs2: ArrayLike,
    rho2: ArrayLike,
) -> _Layers:
    a1 = _velocity_p("vp1", vp1)
    a2 = _velocity_p("vp2", vp2)
    b1 = _velocity_s("vs1", vs1, a1, "vp1")
    b2 = _velocity_s("vs2", vs2, a2, "vp2")
    return _Layers(a1, b1, _density("rho1", rho1), a2, b2, _density("rho2", rho2))


def _angle_rad(angle_deg: ArrayLike) -> FloatArray:
    return np.radians(in_range("angle_deg", angle_deg, 0.0, ANGLE_MAX_DEG, unit="degrees"))


def _contrasts(layers: _Layers) -> tuple[FloatArray, ...]:
    """Relative contrasts dVp/Vp, dVs/Vs, drho/rho (difference over the mean) and Vs/Vp."""
    vp = 0.5 * (layers.vp1 + layers.vp2)
    vs = 0.5 * (layers.vs1 + layers.vs2)
    rho = 0.5 * (layers.rho1 + layers.rho2)
    return (
        (layers.vp2 - layers.vp1) / vp,
        (layers.vs2 - layers.vs1) / vs,
        (layers.rho2 - layers.rho1) / rho,
        vs / vp,
    )


def zoeppritz_pp(
    vp1: ArrayLike,
    vs1: ArrayLike,
    rho1: ArrayLike,
    vp2: ArrayLike,
    vs2: ArrayLike,
    rho2: ArrayLike,
    angle_deg: ArrayLike,
) -> NDArray[np.complex128]:
    """Exact P-P reflection coefficient of a plane P wave incident from layer 1.

    Closed-form solution of the Zoeppritz equations (continuity of displacement
    and traction) in the notation of Aki & Richards (1980), *Quantitative
    Seismology*, section 5.2.4, explicit P-SV coefficients ``a, b, c, d, E, F,
    G, H, D`` (eq. 5.40 in the 2nd edition; equation number from memory):
    ``Rpp = [(b qa1 - c qa2) F - (a + d qa1 qb2) H p^2] / D`` with ``qa = cos(i)/vp``
    and ``qb = cos(j)/vs`` the vertical slownesses.

    Parameters
    ----------
    vp1, vs1, rho1 : array_like
        P velocity (m/s), S velocity (m/s) and density (g/cm3) of the upper layer.
    vp2, vs2, rho2 : array_like
        The same for the lower layer.
    angle_deg : array_like
        Angle of incidence in layer 1, degrees, 0 to ``ANGLE_MAX_DEG``.

    Returns
    -------
    ndarray of complex128
        Rpp, broadcast shape of the arguments. Before any critical angle the
        imaginary part is exactly zero and ``.real`` is the coefficient. Beyond a
        critical angle the vertical slowness of the evanescent waves is the
        principal square root (positive imaginary part, decaying away from the
        interface for the exp(-i omega t) time dependence of Aki & Richards);
        ``abs()`` is the amplitude and does not depend on that convention.
    """
    layers = _layers(vp1, vs1, rho1, vp2, vs2, rho2)
    a1, b1, r1, a2, b2, r2 = layers
    theta = _angle_rad(angle_deg)
    p = np.sin(theta) / a1  # ray parameter, s/m

    def vertical_slowness(v: FloatArray) -> NDArray[np.complex128]:
        cos_sq = (1.0 - (p * v) ** 2).astype(np.complex128)
        return np.asarray(np.sqrt(cos_sq) / v, dtype=np.complex128)

    qa1, qb1 = vertical_slowness(a1), vertical_slowness(b1)
    qa2, qb2 = vertical_slowness(a2), vertical_slowness(b2)
    p2 = p * p
    s1 = 1.0 - 2.0 * b1 * b1 * p2
    s2 = 1.0 - 2.0 * b2 * b2 * p2
    a = r2 * s2 - r1 * s1
    b = r2 * s2 + 2.0 * r1 * b1 * b1 * p2
    c = r1 * s1 + 2.0 * r2 * b2 * b2 * p2
    d = 2.0 * (r2 * b2 * b2 - r1 * b1 * b1)
    e = b * qa1 + c * qa2
    f = b * qb1 + c * qb2
    g = a - d * qa1 * qb2
    h = a - d * qa2 * qb1
    big_d = e * f + g * h * p2
    rpp = ((b * qa1 - c * qa2) * f - (a + d * qa1 * qb2) * h * p2) / big_d
    return np.asarray(rpp, dtype=np.complex128)


def aki_richards(
    vp1: ArrayLike,
    vs1: ArrayLike,
    rho1: ArrayLike,
    vp2: ArrayLike,
    vs2: ArrayLike,
    rho2: ArrayLike,
    angle_deg: ArrayLike,
) -> FloatArray:
    """Linearised P-P reflection coefficient for weak elastic contrasts.

    Aki & Richards (1980), *Quantitative Seismology*, eq. 5.44 (equation number
    from memory)::

        Rpp = 1/2 (1 - 4 vs^2 p^2) drho/rho + dvp / (2 cos^2(theta) vp)
              - 4 vs^2 p^2 dvs/vs

    with ``vp, vs, rho`` the means of the two layers, ``dvp = vp2 - vp1`` etc.,
    ``p = sin(theta1) / vp1`` the exact ray parameter, and ``theta`` the mean of
    the incidence angle ``theta1`` and the transmission angle
    ``theta2 = arcsin(p vp2)`` (the "average angle" convention of the equation).
    Accurate while the relative contrasts are small (see the tests for measured
    errors against :func:`zoeppritz_pp`).

    Parameters
    ----------
    vp1, vs1, rho1 : array_like
        P velocity (m/s), S velocity (m/s) and density (g/cm3) of the upper layer.
    vp2, vs2, rho2 : array_like
        The same for the lower layer.
    angle_deg : array_like
        Angle of incidence in layer 1, degrees, 0 to ``ANGLE_MAX_DEG`` and not
        beyond the P critical angle ``arcsin(vp1 / vp2)`` (no transmitted angle
        exists there).

    Returns
    -------
    ndarray of float64
        Rpp (dimensionless), broadcast shape of the arguments.
    """
    layers = _layers(vp1, vs1, rho1, vp2, vs2, rho2)
    theta1 = _angle_rad(angle_deg)
    p = np.sin(theta1) / layers.vp1
    sin_theta2 = p * layers.vp2
    beyond = sin_theta2 > 1.0
    if np.any(beyond):
        shape = beyond.shape
        angle = float(np.ravel(np.broadcast_to(np.degrees(theta1), shape)[beyond])[0])
        ratio = float(np.ravel(np.broadcast_to(layers.vp1 / layers.vp2, shape)[beyond])[0])
        raise ValueError(
            "angle_deg must not exceed the P critical angle arcsin(vp1/vp2) for the"
            " Aki-Richards approximation; use zoeppritz_pp beyond it"
            f" (got {angle:g} degrees, critical angle {np.degrees(np.arcsin(ratio)):g})"
        )
    theta = 0.5 * (theta1 + np.arcsin(sin_theta2))
    dvp, dvs, drho, _ = _contrasts(layers)
    vs = 0.5 * (layers.vs1 + layers.vs2)
    vs2p2 = (vs * p) ** 2
    return 0.5 * (1.0 - 4.0 * vs2p2) * drho + 0.5 * dvp / np.cos(theta) ** 2 - 4.0 * vs2p2 * dvs


def intercept_gradient(
    vp1: ArrayLike,
    vs1: ArrayLike,
    rho1: ArrayLike,
    vp2: ArrayLike,
    vs2: ArrayLike,
    rho2: ArrayLike,
) -> InterceptGradient:
    """Intercept A and gradient B of the two-term AVO approximation.

    Shuey (1985, Geophysics 50, 609-614) two-term form written with velocity
    contrasts, as obtained by expanding Aki & Richards (1980) eq. 5.44 in
    ``sin^2(theta)`` (Wiggins, Kenny & McClure 1983; from memory)::

        A = 1/2 (dvp/vp + drho/rho)
        B = 1/2 dvp/vp - 2 (vs/vp)^2 (drho/rho + 2 dvs/vs)

    with ``vp, vs, rho`` the means of the two layers and ``dvp = vp2 - vp1`` etc.

    Parameters
    ----------
    vp1, vs1, rho1 : array_like
        P velocity (m/s), S velocity (m/s) and density (g/cm3) of the upper layer.
    vp2, vs2, rho2 : array_like
        The same for the lower layer.

    Returns
    -------
    InterceptGradient
        ``intercept`` and ``gradient`` (dimensionless), broadcast shape of the
        arguments.
    """
    dvp, dvs, drho, ratio = _contrasts(_layers(vp1, vs1, rho1, vp2, vs2, rho2))
    intercept = 0.5 * (dvp + drho)
    gradient = 0.5 * dvp - 2.0 * ratio**2 * (drho + 2.0 * dvs)
    return InterceptGradient(intercept, gradient)


def shuey(
    vp1: ArrayLike,
    vs1: ArrayLike,
    rho1: ArrayLike,
    vp2: ArrayLike,
    vs2: ArrayLike,
    rho2: ArrayLike,
    angle_deg: ArrayLike,
) -> FloatArray:
    """Two-term Shuey (1985) reflection coefficient ``R = A + B sin^2(theta)``.

    ``A`` and ``B`` come from :func:`intercept_gradient`; ``theta`` is the angle
    of incidence in layer 1 (common practice; the difference from the average
    angle is of higher order in the contrasts). The third term of Shuey's
    three-term form, ``1/2 dvp/vp (tan^2 - sin^2)``, is dropped, so the
    approximation holds for incidence angles below about 30 degrees.

    Parameters
    ----------
    vp1, vs1, rho1 : array_like
        P velocity (m/s), S velocity (m/s) and density (g/cm3) of the upper layer.
    vp2, vs2, rho2 : array_like
        The same for the lower layer.
    angle_deg : array_like
        Angle of incidence in layer 1, degrees, 0 to ``ANGLE_MAX_DEG``.

    Returns
    -------
    ndarray of float64
        R (dimensionless), broadcast shape of the arguments.
    """
    intercept, gradient = intercept_gradient(vp1, vs1, rho1, vp2, vs2, rho2)
    theta = _angle_rad(angle_deg)
    return intercept + gradient * np.sin(theta) ** 2


def avo_class(
    intercept: ArrayLike,
    gradient: ArrayLike,
    *,
    near_zero: float = NEAR_ZERO_INTERCEPT,
    reference_angle_deg: float = REFERENCE_ANGLE_DEG,
) -> NDArray[np.str_]:
    """AVO class of each (intercept, gradient) pair.

    Classes I-III after Rutherford & Williams (1989, Geophysics 54, 680-688),
    the IIp subdivision after Ross & Kinman (1995, Geophysics 60, 1398-1408) and
    class IV after Castagna & Swan (1997, The Leading Edge 16, 337-342). With
    ``T = near_zero`` and ``s = sin^2(reference_angle_deg)`` the rules, which
    give every pair exactly one label, are:

    ========  ===============================================================
    label     rule
    ========  ===============================================================
    ``I``     ``A > T`` (high-impedance sand), any gradient. ``B < 0`` is the
              classic case; ``B >= 0`` (quadrant I) lies outside the classic
              scheme and is labelled by its intercept alone.
    ``IIp``   ``0 < A <= T`` and ``A + B s <= 0``: small positive intercept whose
              polarity reverses at or before the reference angle (needs B < 0).
    ``II``    ``-T <= A <= T`` and not IIp (near-zero impedance contrast; any
              gradient, as in Castagna & Swan's table which places class II in
              quadrants II, III or IV).
    ``III``   ``A < -T`` and ``B <= 0``: low-impedance sand, |R| not decreasing
              with angle.
    ``IV``    ``A < -T`` and ``B > 0``: low-impedance sand whose |R| decreases
              with angle (Castagna & Swan 1997).
    ========  ===============================================================

    The threshold ``T`` and the reference angle are common practice, not values
    given by the papers (see ``NEAR_ZERO_INTERCEPT``, ``REFERENCE_ANGLE_DEG``).

    Parameters
    ----------
    intercept, gradient : array_like
        Two-term AVO intercept A and gradient B (dimensionless), e.g. from
        :func:`intercept_gradient`.
    near_zero : float
        T, largest |A| of class II (dimensionless, 0 to 1).
    reference_angle_deg : float
        Angle, degrees (above 0, at most 90), within which a reversal makes IIp.

    Returns
    -------
    ndarray of str
        One of ``AVO_CLASS_LABELS`` per pair, broadcast shape of the arguments.
    """
    a = as_finite("intercept", intercept)
    b = as_finite("gradient", gradient)
    t = float(in_range("near_zero", near_zero, 0.0, 1.0))
    ref = np.radians(float(in_range("reference_angle_deg", reference_angle_deg, 0.0, 90.0,
                                    unit="degrees", low_open=True)))
    a, b = np.broadcast_arrays(a, b)
    far = a + b * np.sin(ref) ** 2
    near_zero_contrast = np.abs(a) <= t
    code = np.where(
        a > t,
        0,
        np.where(
            near_zero_contrast,
            np.where((a > 0.0) & (far <= 0.0), 1, 2),
            np.where(b > 0.0, 4, 3),
        ),
    )
    return np.asarray(AVO_CLASS_LABELS)[code]


def acoustic_impedance(vp: ArrayLike, rho: ArrayLike) -> FloatArray:
    """P (acoustic) impedance ``vp * rho``.

    Parameters
    ----------
    vp : array_like
        P velocity, m/s.
    rho : array_like
        Density, g/cm3.

    Returns
    -------
    ndarray of float64
        Impedance in (m/s)(g/cm3) (multiply by 1000 for kg/(m2 s)).
    """
    return _velocity_p("vp", vp) * _density("rho", rho)


def shear_impedance(vs: ArrayLike, rho: ArrayLike) -> FloatArray:
    """S (shear) impedance ``vs * rho``.

    Parameters
    ----------
    vs : array_like
        S velocity, m/s (above 0).
    rho : array_like
        Density, g/cm3.

    Returns
    -------
    ndarray of float64
        Impedance in (m/s)(g/cm3) (multiply by 1000 for kg/(m2 s)).
    """
    vs_arr = in_range("vs", vs, 0.0, VP_MAX_M_S, unit="m/s", low_open=True)
    return vs_arr * _density("rho", rho)


def vp_vs_ratio(vp: ArrayLike, vs: ArrayLike) -> FloatArray:
    """Velocity ratio ``vp / vs``.

    Parameters
    ----------
    vp : array_like
        P velocity, m/s.
    vs : array_like
        S velocity, m/s (above 0, at most ``VS_VP_MAX * vp``).

    Returns
    -------
    ndarray of float64
        Vp/Vs (dimensionless, at least 2/sqrt(3)).
    """
    vp_arr = _velocity_p("vp", vp)
    return vp_arr / _velocity_s("vs", vs, vp_arr, "vp")


def elastic_impedance(
    vp: ArrayLike,
    vs: ArrayLike,
    rho: ArrayLike,
    angle_deg: ArrayLike,
    k: ArrayLike | None = None,
) -> FloatArray:
    """Elastic impedance of Connolly (1999, The Leading Edge 18, 438-452), eq. 4.

    ``EI = vp^(1 + tan^2 t) * vs^(-8 K sin^2 t) * rho^(1 - 4 K sin^2 t)``, built so
    that ``(EI2 - EI1) / (EI2 + EI1)`` reproduces the linearised reflection
    coefficient at incidence angle ``t`` (equation number from memory).

    Parameters
    ----------
    vp : array_like
        P velocity, m/s.
    vs : array_like
        S velocity, m/s.
    rho : array_like
        Density, g/cm3.
    angle_deg : array_like
        Angle of incidence, degrees, 0 to ``ANGLE_MAX_DEG``.
    k : array_like or None
        K = (vs/vp)^2, held constant over the interval being compared (Connolly
        uses an average). ``None`` uses each sample's own (vs/vp)^2, which breaks
        the comparability of EI between samples with different Vs/Vp.

    Returns
    -------
    ndarray of float64
        EI in m/s and g/cm3 raised to the powers above; only at 0 degrees is it
        the acoustic impedance in (m/s)(g/cm3). Compare EI values only at equal
        angle and K.
    """
    vp_arr = _velocity_p("vp", vp)
    vs_arr = _velocity_s("vs", vs, vp_arr, "vp")
    rho_arr = _density("rho", rho)
    theta = _angle_rad(angle_deg)
    if k is None:
        k_arr = (vs_arr / vp_arr) ** 2
    else:
        k_arr = in_range("k", k, 0.0, VS_VP_MAX**2, low_open=True)
    sin2 = np.sin(theta) ** 2
    return (
        vp_arr ** (1.0 + np.tan(theta) ** 2)
        * vs_arr ** (-8.0 * k_arr * sin2)
        * rho_arr ** (1.0 - 4.0 * k_arr * sin2)
    )
