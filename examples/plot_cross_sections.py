"""One figure per bundled table: cross section (or CIA coefficient) vs wavelength at three temperatures.

Usage::

    python examples/plot_cross_sections.py [--tables opacity_tables] [--out figures/cross_sections]
                                           [--pressure 1.0]

A visual check of the built-in molecular physics (band positions, temperature
dependence, hot bands); see ``opacity_tables/README.md`` for what these
tables are good for.
"""
from __future__ import annotations

import argparse
from pathlib import Path

import matplotlib

matplotlib.use("Agg")
import matplotlib.pyplot as plt  # noqa: E402
import numpy as np  # noqa: E402

from retrieve.opacity.table import read_table  # noqa: E402

TEMPERATURES_K = (500.0, 1400.0, 3000.0)


def plot_table(path: Path, out_dir: Path, pressure_bar: float = 1.0) -> Path:
    """Write ``<species>.png`` for one table and return its path."""
    table = read_table(path)
    fig, ax = plt.subplots(figsize=(8.0, 3.6))
    for t in TEMPERATURES_K:
        it = int(np.argmin(np.abs(table.temperature_K - t)))
        if table.kind == "cia":
            row = table.log10_value[it]
            label = f"{table.temperature_K[it]:.0f} K"
        else:
            ip = int(np.argmin(np.abs(np.log10(table.pressure_bar) - np.log10(pressure_bar))))
            row = table.log10_value[ip, it]
            label = f"{table.temperature_K[it]:.0f} K, {table.pressure_bar[ip]:g} bar"
        ax.plot(table.wavelength_um, 10.0 ** row.astype(np.float64), lw=0.7, label=label)
    ax.set_yscale("log")
    finite = table.log10_value[table.log10_value > -59.0]
    if finite.size:
        top = float(finite.max())
        ax.set_ylim(10.0 ** (top - 8.0), 10.0 ** (top + 0.5))
    ax.set_xlabel("wavelength (µm)")
    ax.set_ylabel("CIA (cm$^5$ molecule$^{-2}$)" if table.kind == "cia" else "σ (cm$^2$ molecule$^{-1}$)")
    ax.set_title(f"{table.species}: bundled table (built-in molecular physics, R = 1000 bins)")
    ax.legend(frameon=False, fontsize=8)
    fig.tight_layout()
    out = out_dir / f"{table.species}.png"
    fig.savefig(out, dpi=130)
    plt.close(fig)
    return out


def main(argv=None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    root = Path(__file__).resolve().parents[1]
    parser.add_argument("--tables", type=Path, default=root / "opacity_tables")
    parser.add_argument("--out", type=Path, default=Path("figures") / "cross_sections")
    parser.add_argument("--pressure", type=float, default=1.0, help="pressure of the cross-section curves, bar")
    args = parser.parse_args(argv)
    args.out.mkdir(parents=True, exist_ok=True)
    for path in sorted(args.tables.glob("*.h5")):
        print(f"wrote {plot_table(path, args.out, args.pressure)}")
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
