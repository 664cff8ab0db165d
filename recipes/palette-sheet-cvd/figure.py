"""Palette sheet: sequential, diverging and qualitative palettes under simulated colour-vision
deficiency (Machado, Oliveira & Fernandes 2009) and in grayscale, with the smallest colour
difference in each cell.

Run by hand: ``python figure.py``. Only numpy, pandas and matplotlib: the simulation is here.
"""
from __future__ import annotations

import matplotlib
import matplotlib.pyplot as plt
import numpy as np
import pandas as pd
from matplotlib.collections import PatchCollection
from matplotlib.colors import to_rgb
from matplotlib.figure import Figure
from matplotlib.patches import Rectangle

# Machado, Oliveira & Fernandes (2009), severity 1.0 (dichromacy); applied to linear RGB.
MACHADO = {
    "protanopia": np.array([[0.152286, 1.052583, -0.204868],
                            [0.114503, 0.786281, 0.099216],
                            [-0.003882, -0.048116, 1.051998]]),
    "deuteranopia": np.array([[0.367322, 0.860646, -0.227968],
                              [0.280085, 0.672501, 0.047413],
                              [-0.011820, 0.042940, 0.968881]]),
    "tritanopia": np.array([[1.255528, -0.076749, -0.178779],
                            [-0.078411, 0.930809, 0.147602],
                            [0.004733, 0.691367, 0.303900]]),
}
SRGB_TO_XYZ = np.array([[0.4124564, 0.3575761, 0.1804375],   # IEC 61966-2-1, D65
                        [0.2126729, 0.7151522, 0.0721750],
                        [0.0193339, 0.1191920, 0.9503041]])
WHITE_D65 = SRGB_TO_XYZ.sum(axis=1)
VIEWS = ("normal vision", "protanopia", "deuteranopia", "tritanopia", "grayscale")
CLOSE = 10.0  # Delta E*ab below which two swatches are hard to tell apart side by side


def srgb_to_linear(rgb: np.ndarray) -> np.ndarray:
    """Undo the sRGB transfer curve (IEC 61966-2-1); simulation and luminance need linear light."""
    rgb = np.asarray(rgb, dtype=float)
    return np.where(rgb <= 0.04045, rgb / 12.92, ((rgb + 0.055) / 1.055) ** 2.4)


def linear_to_srgb(lin: np.ndarray) -> np.ndarray:
    """Apply the sRGB transfer curve after clipping to the displayable range."""
    lin = np.clip(np.asarray(lin, dtype=float), 0.0, 1.0)
    return np.where(lin <= 0.0031308, 12.92 * lin, 1.055 * lin ** (1 / 2.4) - 0.055)


def simulate_cvd(rgb: np.ndarray, kind: str) -> np.ndarray:
    """How sRGB colours (..., 3) in 0-1 appear with a dichromacy, by the Machado 2009 model."""
    return linear_to_srgb(srgb_to_linear(rgb) @ MACHADO[kind].T)


def to_grayscale(rgb: np.ndarray) -> np.ndarray:
    """Gray of equal relative luminance Y, as a photocopier or grayscale print would show it."""
    y = srgb_to_linear(rgb) @ SRGB_TO_XYZ[1]
    return np.repeat(linear_to_srgb(y)[..., None], 3, axis=-1)


def srgb_to_lab(rgb: np.ndarray) -> np.ndarray:
    """CIE L*a*b* (D65) of sRGB colours, for a perceptual colour difference."""
    xyz = srgb_to_linear(rgb) @ SRGB_TO_XYZ.T / WHITE_D65
    f = np.where(xyz > (6 / 29) ** 3, np.cbrt(xyz), xyz / (3 * (6 / 29) ** 2) + 4 / 29)
    return np.stack([116 * f[..., 1] - 16, 500 * (f[..., 0] - f[..., 1]),
                     200 * (f[..., 1] - f[..., 2])], axis=-1)


def min_delta_e(rgb: np.ndarray, neighbours_only: bool) -> float:
    """Smallest CIE76 Delta E*ab between swatches: adjacent ones for ordered palettes (steps must
    stay visible), any pair for qualitative ones (every group must stay distinct)."""
    lab = srgb_to_lab(rgb)
    if neighbours_only:
        return float(np.linalg.norm(np.diff(lab, axis=0), axis=1).min())
    dist = np.linalg.norm(lab[:, None, :] - lab[None, :, :], axis=-1)
    return float(dist[np.triu_indices(len(lab), 1)].min())


def palette_colours(row: pd.Series) -> np.ndarray:
    """The palette's sRGB colours: listed hex codes, or samples of a matplotlib colormap."""
    if isinstance(row["colours"], str) and row["colours"].strip():
        return np.array([to_rgb(c) for c in row["colours"].split()])
    cmap = matplotlib.colormaps[row["palette"]]
    n = int(row["n_colours"])
    if row["kind"] == "qualitative":
        return np.array(cmap.colors[:n])[:, :3]
    return cmap(np.linspace(0.0, 1.0, n))[:, :3]


def view(rgb: np.ndarray, name: str) -> np.ndarray:
    """The colours as seen in one column of the sheet."""
    if name == "normal vision":
        return np.asarray(rgb, dtype=float)
    if name == "grayscale":
        return to_grayscale(rgb)
    return simulate_cvd(rgb, name)


def load() -> tuple[pd.DataFrame]:
    """Read the list of palettes by relative path."""
    return (pd.read_csv("data/palettes.csv", keep_default_na=False),)


def draw(palettes: pd.DataFrame) -> Figure:
    """Rows are palettes grouped by kind, columns are ways of seeing; each cell notes min Delta E."""
    n_rows = len(palettes)
    fig, ax = plt.subplots(figsize=(180 / 25.4, (22 + 11.5 * n_rows) / 25.4),
                           layout="constrained")
    rects, faces = [], []
    for r, (_, row) in enumerate(palettes.iterrows()):
        rgb = palette_colours(row)
        for c, name in enumerate(VIEWS):
            seen = view(rgb, name)
            width = 0.9 / len(seen)
            for k, colour in enumerate(seen):
                rects.append(Rectangle((c + 0.05 + k * width, r + 0.08), width, 0.55))
                faces.append(colour)
            d_e = min_delta_e(seen, neighbours_only=row["kind"] != "qualitative")
            warn = d_e < CLOSE
            ax.text(c + 0.5, r + 0.68, f"min \u0394E {d_e:.1f}",
                    ha="center", va="top", fontsize=7, weight="bold" if warn else "normal",
                    color="#B00000" if warn else "#333333")
        ax.text(-0.06, r + 0.36, f"{row['palette']}\n{row['kind']}, {row['source']}", ha="right",
                va="center", fontsize=7)
    ax.add_collection(PatchCollection(rects, facecolors=faces, edgecolors="white", linewidths=0.3))
    for c, name in enumerate(VIEWS):
        ax.text(c + 0.5, -0.15, name, ha="center", va="bottom", fontsize=8, weight="bold")
    kinds = palettes["kind"].to_numpy()
    for r in range(1, n_rows):
        if kinds[r] != kinds[r - 1]:
            ax.axhline(r - 0.04, color="#999999", lw=0.6, xmin=0, xmax=1)
    ax.set_xlim(-1.55, len(VIEWS))
    ax.set_ylim(n_rows, -0.45)
    ax.axis("off")
    fig.suptitle("Palettes under simulated dichromacy (Machado et al. 2009, severity 1) and in "
                 "grayscale", fontsize=9)
    fig.supxlabel("min \u0394E: smallest CIE76 \u0394E*ab between neighbouring swatches (ordered "
                  "palettes) or between any two swatches (qualitative);\nred bold where it falls "
                  f"below {CLOSE:.0f}, when swatches are hard to tell apart even side by side.",
                  fontsize=7)
    return fig


if __name__ == "__main__":
    draw(*load())
    plt.show()
