"""Figures. Each function returns a matplotlib Figure and accepts an optional Axes."""

from __future__ import annotations

import numpy as np

__all__ = ["plot_polar_fields", "HEMISPHERE_STYLE"]

#: Line colours and markers per hemisphere: a blue and an orange that stay apart for
#: colour-blind readers, with different markers and line styles for grey-scale print.
HEMISPHERE_STYLE = {
    "north": {"color": "#1f5fa6", "marker": "^", "linestyle": "-"},
    "south": {"color": "#c45a12", "marker": "v", "linestyle": "--"},
}


def plot_polar_fields(ds, ax=None, caption: str | None = None):
    """Mean polar-cap field of both hemispheres against time, with the axial dipole.

    Parameters
    ----------
    ds : xarray.Dataset
        A record from :func:`polarflux.measure_archive`.
    ax : matplotlib Axes, optional
        Draw into this Axes; a new Figure is made otherwise.
    caption : str, optional
        Small text under the axes naming the source of the data.
    """
    import matplotlib

    if ax is None:
        matplotlib.use("Agg", force=False)
        import matplotlib.pyplot as plt

        fig, ax = plt.subplots(figsize=(8, 4.2), layout="constrained")
    else:
        fig = ax.figure
    times = ds["time"].values
    cap = float(ds.attrs.get("cap_deg", np.nan))
    for hemisphere, style in HEMISPHERE_STYLE.items():
        values = ds["mean_field"].sel(hemisphere=hemisphere).values
        ax.plot(times, values, label=f"{hemisphere} cap (poleward of {cap:g}°)", markersize=4, **style)
    ax.plot(times, ds["axial_dipole"].values, color="0.35", linestyle=":", label="axial dipole")
    ax.axhline(0.0, color="0.6", linewidth=0.8)
    ax.set_xlabel("time (UTC)")
    ax.set_ylabel("mean radial field (G)")
    ax.set_title("Polar-cap mean field")
    ax.legend(loc="best", fontsize="small")
    if caption:
        _add_caption(fig, caption)
    return fig


def _add_caption(fig, caption: str) -> None:
    """Small grey text along the bottom edge, with room kept for it."""
    engine = fig.get_layout_engine()
    if engine is not None and hasattr(engine, "set"):
        engine.set(rect=(0.0, 0.045, 1.0, 0.955))
    fig.text(0.01, 0.008, caption, fontsize="x-small", color="0.35", ha="left", va="bottom")
