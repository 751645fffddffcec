"""House style shared by every figure: colours, fonts, labels, saving.

The palette is our own (ink, rust, ochre, lagoon, moss, plum); it was chosen
to stay distinguishable in greyscale print and for the common forms of
colour blindness (lightness differs between every pair).  All figures are
drawn with the non-interactive Agg canvas, so nothing here needs a display.
"""
from __future__ import annotations

import contextlib
import re
from pathlib import Path

import matplotlib

matplotlib.use("Agg", force=False)  # headless; a no-op if a backend is already chosen
import matplotlib.pyplot as plt  # noqa: E402
from matplotlib.figure import Figure  # noqa: E402

from ..errors import UserError  # noqa: E402

INK = "#22223b"        # data points, axes text
RUST = "#b5452b"       # best-fit model
OCHRE = "#e0a030"      # posterior envelopes
LAGOON = "#2a7f8f"     # second data set / truth markers
MOSS = "#6a8d3a"
PLUM = "#7d4e8a"
SAND = "#efe6d2"       # light fills

#: One colour per molecule for band shading and abundance panels.
MOLECULE_COLOURS = {
    "H2O": "#3b75af",
    "CH4": MOSS,
    "CO": RUST,
    "CO2": "#8c6d31",
    "NH3": PLUM,
    "K": "#c77cab",
    "Na": "#d9a441",
    "FeH": "#5f5f5f",
}
#: Colours for objects / data sets beyond the named ones.
CYCLE = [INK, LAGOON, RUST, MOSS, PLUM, OCHRE]

FORMATS = ("png", "pdf")

_RC = {
    "font.family": "DejaVu Sans",
    "font.size": 9.0,
    "axes.labelsize": 9.0,
    "axes.titlesize": 9.5,
    "axes.edgecolor": INK,
    "axes.labelcolor": INK,
    "axes.linewidth": 0.8,
    "axes.prop_cycle": matplotlib.cycler(color=CYCLE),
    "axes.spines.top": False,
    "axes.spines.right": False,
    "xtick.color": INK,
    "ytick.color": INK,
    "xtick.direction": "in",
    "ytick.direction": "in",
    "xtick.minor.visible": True,
    "ytick.minor.visible": True,
    "legend.frameon": False,
    "legend.fontsize": 8.0,
    "figure.dpi": 110,
    "savefig.dpi": 150,
    "savefig.bbox": "tight",
    "pdf.fonttype": 42,   # embed TrueType so text stays editable in journals' tools
}


@contextlib.contextmanager
def house_style():
    """Context manager applying the house rc settings to figures made inside it."""
    with matplotlib.rc_context(_RC):
        yield


def new_figure(figsize=(6.4, 4.2)) -> Figure:
    """A figure not registered with pyplot (so it is garbage collected normally)."""
    return Figure(figsize=figsize, layout="constrained")


def molecule_colour(molecule: str, index: int = 0) -> str:
    """Colour of a molecule; unknown molecules take colours from :data:`CYCLE`."""
    return MOLECULE_COLOURS.get(molecule, CYCLE[index % len(CYCLE)])


def molecule_tex(molecule: str) -> str:
    """``"CH4"`` → ``"CH$_4$"`` (digits become subscripts)."""
    return re.sub(r"(\d+)", r"$_{\1}$", molecule)


_FIXED_LABELS = {
    "log_g": r"$\log_{10} g$ [cm s$^{-2}$]",
    "radius_rjup": r"$R$ [$R_\mathrm{Jup}$]",
    "distance_pc": r"$d$ [pc]",
    "parallax_mas": r"$\varpi$ [mas]",
    "t_iso": r"$T_\mathrm{iso}$ [K]",
    "t_int": r"$T_\mathrm{int}$ [K]",
    "t_irr": r"$T_\mathrm{irr}$ [K]",
    "log_kappa_ir": r"$\log_{10} \kappa_\mathrm{IR}$ [cm$^2$ g$^{-1}$]",
    "log_gamma": r"$\log_{10} \gamma$",
    "t_deep": r"$T_\mathrm{deep}$ [K]",
    "log_p_cloud_top": r"$\log_{10} P_\mathrm{cloud}$ [bar]",
    "cloud_tau_slope": r"cloud $\tau$ slope",
    "mass_mjup": r"$M$ [$M_\mathrm{Jup}$]",
    "c_to_o": r"C/O",
    "t_eff": r"$T_\mathrm{eff}$ [K]",
}


def parameter_label(name: str) -> str:
    """Axis label with units for a forward-model / likelihood parameter name.

    Names follow the table in DEVELOPERS.md; unknown names are returned as-is
    (with underscores escaped) so a new parameter never breaks a figure.
    """
    if name in _FIXED_LABELS:
        return _FIXED_LABELS[name]
    patterns = [
        (r"log_vmr_(\w+)", lambda m: rf"$\log_{{10}}$ VMR({molecule_tex(m[1])})"),
        (r"t_knot_(\d+)", lambda m: rf"$T_{{{m[1]}}}$ [K]"),
        (r"dlnt_dlnp_(\d+)", lambda m: rf"$(d\ln T/d\ln P)_{{{m[1]}}}$"),
        (r"scale_(\w+)", lambda m: f"flux scale ({m[1]})"),
        (r"log_inflate_(\w+)", lambda m: rf"$\log_{{10}}$ inflation ({m[1]})"),
        (r"gp_amp_(\w+)", lambda m: f"GP amplitude ({m[1]})"),
        (r"gp_length_um_(\w+)", lambda m: rf"GP length ({m[1]}) [µm]"),
    ]
    for pattern, make in patterns:
        m = re.fullmatch(pattern, name)
        if m:
            return make(m)
    return name.replace("_", r"\_") if "$" in name else name


def flux_scale(values) -> tuple[float, str]:
    """A power of ten to divide fluxes by for readable tick labels, and its label.

    Returns ``(factor, label)`` with the label in W m⁻² µm⁻¹.
    """
    import numpy as np

    finite = np.abs(np.asarray(values, dtype=float))
    finite = finite[np.isfinite(finite) & (finite > 0)]
    exponent = int(np.floor(np.log10(np.median(finite)))) if finite.size else 0
    factor = 10.0 ** exponent
    unit = r"W m$^{-2}$ µm$^{-1}$"
    label = rf"$F_\lambda$ [$10^{{{exponent}}}$ {unit}]" if exponent else rf"$F_\lambda$ [{unit}]"
    return factor, label


def save_figure(fig: Figure, path, fmt: str | None = None) -> Path:
    """Write ``fig`` to ``path`` (PNG or PDF, from ``fmt`` or the suffix).

    Returns the path written.  Raises :class:`UserError` for other formats.
    """
    path = Path(path)
    fmt = (fmt or path.suffix.lstrip(".") or "png").lower()
    if fmt not in FORMATS:
        raise UserError(f"{path}: figure format {fmt!r} is not supported; use one of {', '.join(FORMATS)}")
    if path.suffix.lower() != f".{fmt}":
        path = path.with_suffix(f".{fmt}")
    path.parent.mkdir(parents=True, exist_ok=True)
    fig.savefig(path, format=fmt)
    return path


def figure_to_png_bytes(fig: Figure, dpi: int = 110) -> bytes:
    """PNG bytes of ``fig`` (for embedding in the HTML report)."""
    import io

    buf = io.BytesIO()
    fig.savefig(buf, format="png", dpi=dpi)
    return buf.getvalue()


def close(fig: Figure) -> None:
    """Release a figure (works for pyplot figures and plain ``Figure`` objects)."""
    plt.close(fig)
