"""Colour science for the figure audit: sRGB <-> CIELAB, CIEDE2000, luminance, CVD simulation.

Why our own module rather than a colour library: the audit runs on every figure of every build
and inside the recipe's child process (``collect_facts`` computes colour-map lightness), so it
must be small, numpy-only and fast. Every formula names its source; the tests check each one
against published test data or an independent library.

Conventions: colours are float arrays with a last axis of 3, sRGB in [0, 1] ("sRGB1").

Sources
- sRGB transfer curve and primaries: IEC 61966-2-1:1999 (as summarised in WCAG 2.1's
  "relative luminance" definition; WCAG writes the threshold 0.03928, the standard 0.04045 --
  the two agree on every 8-bit value).
- CIELAB: CIE 15:2004, D65 white point (X, Y, Z) = (0.95047, 1.0, 1.08883).
- CIEDE2000: Sharma, Wu & Dalal (2005), Color Research & Application 30(1), 21-30, eqs. 1-22.
- Colour-vision deficiency: Machado, Oliveira & Fernandes (2009), "A physiologically-based model
  for simulation of color vision deficiency", IEEE TVCG 15(6), 1291-1298: one 3x3 matrix per
  deficiency and severity 0.0, 0.1, ..., 1.0, applied to *linear* RGB; severities in between are
  interpolated linearly between the two neighbouring matrices, as the authors suggest.
"""
from __future__ import annotations

import numpy as np
from numpy.typing import ArrayLike, NDArray

Array = NDArray[np.float64]

# Linear sRGB -> CIE XYZ (D65), Y of white = 1: the IEC 61966-2-1 matrix computed to 7
# decimals from the sRGB primaries and D65 (from memory), so that white lands on the D65 white
# point below and gets a* = b* = 0 exactly (the standard's 4-decimal rounding does not).
_RGB_TO_XYZ = np.array([[0.4124564, 0.3575761, 0.1804375],
                        [0.2126729, 0.7151522, 0.0721750],
                        [0.0193339, 0.1191920, 0.9503041]])
_WHITE_D65 = np.array([0.95047, 1.0, 1.08883])
# ITU-R BT.709 / sRGB luminance weights (the middle row above), used by WCAG 2.1.
LUMA_709 = np.array([0.2126, 0.7152, 0.0722])

CVD_KINDS = ("protan", "deutan", "tritan")

# Machado, Oliveira & Fernandes (2009), severity 0.1 ... 1.0 (0.0 is the identity), rows of the
# matrix that maps linear (R, G, B) to simulated linear (R, G, B). Typed in from the paper's
# published table ("from memory"); tests/test_colour.py checks every step against colorspacious.
_MACHADO: dict[str, list[list[list[float]]]] = {
    "protan": [
        [[0.856167, 0.182038, -0.038205], [0.029342, 0.955115, 0.015544], [-0.002880, -0.001563, 1.004443]],
        [[0.734766, 0.334872, -0.069637], [0.051840, 0.919198, 0.028963], [-0.004928, -0.004209, 1.009137]],
        [[0.630323, 0.465641, -0.095964], [0.069181, 0.890046, 0.040773], [-0.006308, -0.007724, 1.014032]],
        [[0.539009, 0.579343, -0.118352], [0.082546, 0.866121, 0.051332], [-0.007136, -0.011959, 1.019095]],
        [[0.458064, 0.679578, -0.137642], [0.092785, 0.846313, 0.060902], [-0.007494, -0.016807, 1.024301]],
        [[0.385450, 0.769005, -0.154455], [0.100526, 0.829802, 0.069673], [-0.007442, -0.022190, 1.029632]],
        [[0.319627, 0.849633, -0.169261], [0.106241, 0.815969, 0.077790], [-0.007025, -0.028051, 1.035076]],
        [[0.259411, 0.923008, -0.182420], [0.110296, 0.804340, 0.085364], [-0.006276, -0.034346, 1.040622]],
        [[0.203876, 0.990338, -0.194214], [0.112975, 0.794542, 0.092483], [-0.005222, -0.041043, 1.046265]],
        [[0.152286, 1.052583, -0.204868], [0.114503, 0.786281, 0.099216], [-0.003882, -0.048116, 1.051998]],
    ],
    "deutan": [
        [[0.866435, 0.177704, -0.044139], [0.049567, 0.939063, 0.011370], [-0.003453, 0.007233, 0.996220]],
        [[0.760729, 0.319078, -0.079807], [0.090568, 0.889315, 0.020117], [-0.006027, 0.013325, 0.992702]],
        [[0.675425, 0.433850, -0.109275], [0.125303, 0.847755, 0.026942], [-0.007950, 0.018572, 0.989378]],
        [[0.605511, 0.528560, -0.134071], [0.155318, 0.812366, 0.032316], [-0.009376, 0.023176, 0.986200]],
        [[0.547494, 0.607765, -0.155259], [0.181692, 0.781742, 0.036566], [-0.010410, 0.027275, 0.983136]],
        [[0.498864, 0.674741, -0.173604], [0.205199, 0.754872, 0.039929], [-0.011131, 0.030969, 0.980162]],
        [[0.457771, 0.731899, -0.189670], [0.226409, 0.731012, 0.042579], [-0.011595, 0.034333, 0.977261]],
        [[0.422823, 0.781057, -0.203881], [0.245752, 0.709602, 0.044646], [-0.011843, 0.037423, 0.974421]],
        [[0.392952, 0.823610, -0.216562], [0.263559, 0.690210, 0.046232], [-0.011910, 0.040281, 0.971630]],
        [[0.367322, 0.860646, -0.227968], [0.280085, 0.672501, 0.047413], [-0.011820, 0.042940, 0.968881]],
    ],
    "tritan": [
        [[0.926670, 0.092514, -0.019184], [0.021191, 0.964503, 0.014306], [0.008437, 0.054813, 0.936750]],
        [[0.895720, 0.133330, -0.029050], [0.029997, 0.945400, 0.024603], [0.013027, 0.104707, 0.882266]],
        [[0.905871, 0.127791, -0.033662], [0.026856, 0.941251, 0.031893], [0.013410, 0.148296, 0.838294]],
        [[0.948035, 0.089490, -0.037526], [0.014364, 0.946792, 0.038844], [0.010853, 0.193991, 0.795156]],
        [[1.017277, 0.027029, -0.044306], [-0.006113, 0.958479, 0.047634], [0.006379, 0.248708, 0.744913]],
        [[1.104996, -0.046633, -0.058363], [-0.032137, 0.971635, 0.060503], [0.001336, 0.317922, 0.680742]],
        [[1.193214, -0.109812, -0.083402], [-0.058496, 0.979410, 0.079086], [-0.002346, 0.403492, 0.598854]],
        [[1.257728, -0.139648, -0.118081], [-0.078003, 0.975409, 0.102594], [-0.003316, 0.501214, 0.502102]],
        [[1.278864, -0.125333, -0.153531], [-0.084748, 0.957674, 0.127074], [-0.000989, 0.601151, 0.399838]],
        [[1.255528, -0.076749, -0.178779], [-0.078411, 0.930809, 0.147602], [0.004733, 0.691367, 0.303900]],
    ],
}
_MACHADO_STACK = {kind: np.concatenate([np.eye(3)[None], np.array(rows)])
                  for kind, rows in _MACHADO.items()}


def as_rgb(colours: ArrayLike) -> Array:
    """Float array with a last axis of 3; a ValueError names the shape when it is not."""
    arr = np.asarray(colours, dtype=np.float64)
    if arr.shape[-1:] != (3,):
        raise ValueError(f"expected colours with a last axis of 3, got shape {arr.shape}")
    return arr


def hex_to_rgb(code: str) -> tuple[float, float, float]:
    """'#rrggbb' (or 'rrggbb', '#rgb') -> sRGB1 floats."""
    text = code.strip().lstrip("#")
    if len(text) == 3:
        text = "".join(ch * 2 for ch in text)
    if len(text) != 6:
        raise ValueError(f"not a #rrggbb colour: {code!r}")
    return tuple(int(text[i:i + 2], 16) / 255.0 for i in (0, 2, 4))  # type: ignore[return-value]


def rgb_to_hex(rgb: ArrayLike) -> str:
    """sRGB1 triple -> '#rrggbb' (rounded, clipped)."""
    vals = np.clip(np.round(np.asarray(rgb, dtype=float)[:3] * 255), 0, 255).astype(int)
    return "#{:02x}{:02x}{:02x}".format(*vals)


def srgb_to_linear(rgb: ArrayLike) -> Array:
    """Undo the sRGB transfer curve (IEC 61966-2-1): CVD matrices and luminance need light."""
    c = np.asarray(rgb, dtype=np.float64)
    return np.where(c <= 0.04045, c / 12.92, ((c + 0.055) / 1.055) ** 2.4)


def linear_to_srgb(lin: ArrayLike) -> Array:
    """Apply the sRGB transfer curve; negative input is kept linear so no NaN appears."""
    c = np.asarray(lin, dtype=np.float64)
    safe = np.maximum(c, 0.0031308)
    return np.where(c <= 0.0031308, 12.92 * c, 1.055 * safe ** (1 / 2.4) - 0.055)


def srgb_to_xyz(rgb: ArrayLike) -> Array:
    """sRGB1 -> CIE XYZ with Y(white) = 1."""
    return srgb_to_linear(as_rgb(rgb)) @ _RGB_TO_XYZ.T


def xyz_to_lab(xyz: ArrayLike, white: ArrayLike = _WHITE_D65) -> Array:
    """CIE 1976 L*a*b* (CIE 15:2004), exact rational constants 216/24389 and 24389/27."""
    t = np.asarray(xyz, dtype=np.float64) / np.asarray(white)
    eps, kappa = 216 / 24389, 24389 / 27
    f = np.where(t > eps, np.cbrt(t), (kappa * t + 16) / 116)
    return np.stack([116 * f[..., 1] - 16, 500 * (f[..., 0] - f[..., 1]),
                     200 * (f[..., 1] - f[..., 2])], axis=-1)


def srgb_to_lab(rgb: ArrayLike) -> Array:
    """sRGB1 -> CIELAB (D65): the perceptual space in which the audit measures differences."""
    return xyz_to_lab(srgb_to_xyz(rgb))


def relative_luminance(rgb: ArrayLike) -> Array:
    """WCAG 2.1 relative luminance: BT.709 weights on linear sRGB, 0 (black) .. 1 (white)."""
    return srgb_to_linear(as_rgb(rgb)) @ LUMA_709


def contrast_ratio(a: ArrayLike, b: ArrayLike) -> Array:
    """WCAG 2.1 contrast ratio (L1 + 0.05) / (L2 + 0.05), lighter over darker: 1 .. 21."""
    la, lb = relative_luminance(a), relative_luminance(b)
    return (np.maximum(la, lb) + 0.05) / (np.minimum(la, lb) + 0.05)


def gray_lightness(rgb: ArrayLike) -> Array:
    """L* of the colour printed in grayscale: L* of its relative luminance (CIE 15:2004)."""
    y = relative_luminance(rgb)
    eps, kappa = 216 / 24389, 24389 / 27
    return np.where(y > eps, 116 * np.cbrt(y) - 16, kappa * y)


def to_grayscale(rgb: ArrayLike) -> Array:
    """sRGB1 gray with the same relative luminance: how a monochrome print renders it."""
    y = relative_luminance(rgb)
    g = linear_to_srgb(y)
    return np.repeat(g[..., None], 3, axis=-1)


def cvd_matrix(kind: str, severity: float) -> Array:
    """Machado (2009) matrix for ``kind`` at ``severity`` in [0, 1], linearly interpolated."""
    if kind not in _MACHADO_STACK:
        raise ValueError(f"unknown deficiency {kind!r}; expected one of {', '.join(CVD_KINDS)}")
    if not 0.0 <= severity <= 1.0:
        raise ValueError(f"severity must be between 0 and 1, got {severity}")
    stack = _MACHADO_STACK[kind]
    pos = severity * 10
    low = min(int(np.floor(pos)), 9)
    frac = pos - low
    return (1 - frac) * stack[low] + frac * stack[low + 1]


def simulate_cvd(rgb: ArrayLike, kind: str, severity: float = 1.0, clip: bool = True) -> Array:
    """How sRGB1 colours look with a colour-vision deficiency (Machado 2009, linear RGB).

    ``clip`` keeps the result displayable; pass False to compare with an unclipped reference.
    """
    lin = srgb_to_linear(as_rgb(rgb)) @ cvd_matrix(kind, severity).T
    if clip:
        lin = np.clip(lin, 0.0, 1.0)
    return linear_to_srgb(lin)


def ciede2000(lab1: ArrayLike, lab2: ArrayLike, kl: float = 1.0, kc: float = 1.0,
              kh: float = 1.0) -> Array:
    """CIEDE2000 colour difference, vectorised; Sharma, Wu & Dalal (2005) eqs. 1-22.

    Why this formula: it is the CIE's current recommendation and corrects CIE76's overstatement
    of differences in saturated blues and its neglect of lightness crowding near white.
    """
    l1, a1, b1 = np.moveaxis(np.asarray(lab1, dtype=np.float64), -1, 0)
    l2, a2, b2 = np.moveaxis(np.asarray(lab2, dtype=np.float64), -1, 0)
    c_bar = (np.hypot(a1, b1) + np.hypot(a2, b2)) / 2
    g = 0.5 * (1 - np.sqrt(c_bar ** 7 / (c_bar ** 7 + 25.0 ** 7)))
    a1p, a2p = (1 + g) * a1, (1 + g) * a2
    c1p, c2p = np.hypot(a1p, b1), np.hypot(a2p, b2)
    h1p = np.degrees(np.arctan2(b1, a1p)) % 360
    h2p = np.degrees(np.arctan2(b2, a2p)) % 360
    h1p = np.where((a1p == 0) & (b1 == 0), 0.0, h1p)
    h2p = np.where((a2p == 0) & (b2 == 0), 0.0, h2p)
    dl = l2 - l1
    dc = c2p - c1p
    dh = h2p - h1p
    dh = np.where(dh > 180, dh - 360, np.where(dh < -180, dh + 360, dh))
    dh = np.where(c1p * c2p == 0, 0.0, dh)
    dH = 2 * np.sqrt(c1p * c2p) * np.sin(np.radians(dh) / 2)
    l_bar = (l1 + l2) / 2
    cp_bar = (c1p + c2p) / 2
    h_sum = h1p + h2p
    hp_bar = np.where(np.abs(h1p - h2p) <= 180, h_sum / 2,
                      np.where(h_sum < 360, (h_sum + 360) / 2, (h_sum - 360) / 2))
    hp_bar = np.where(c1p * c2p == 0, h_sum, hp_bar)
    t = (1 - 0.17 * np.cos(np.radians(hp_bar - 30)) + 0.24 * np.cos(np.radians(2 * hp_bar))
         + 0.32 * np.cos(np.radians(3 * hp_bar + 6)) - 0.20 * np.cos(np.radians(4 * hp_bar - 63)))
    d_theta = 30 * np.exp(-(((hp_bar - 275) / 25) ** 2))
    r_c = 2 * np.sqrt(cp_bar ** 7 / (cp_bar ** 7 + 25.0 ** 7))
    s_l = 1 + 0.015 * (l_bar - 50) ** 2 / np.sqrt(20 + (l_bar - 50) ** 2)
    s_c = 1 + 0.045 * cp_bar
    s_h = 1 + 0.015 * cp_bar * t
    r_t = -np.sin(np.radians(2 * d_theta)) * r_c
    tl, tc, th = dl / (kl * s_l), dc / (kc * s_c), dH / (kh * s_h)
    return np.sqrt(tl ** 2 + tc ** 2 + th ** 2 + r_t * tc * th)


def pairwise_delta_e(rgb: ArrayLike) -> Array:
    """Symmetric matrix of CIEDE2000 differences between every pair of sRGB1 colours."""
    lab = srgb_to_lab(as_rgb(rgb))
    return ciede2000(lab[:, None, :], lab[None, :, :])


def chroma(rgb: ArrayLike) -> Array:
    """CIELAB chroma C*ab: how far from gray; the audit treats C* < ~10 as a neutral colour."""
    lab = srgb_to_lab(rgb)
    return np.hypot(lab[..., 1], lab[..., 2])
