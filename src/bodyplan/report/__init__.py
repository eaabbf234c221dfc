"""Pictures and the self-contained HTML page of the gap report and the allometry fit.

matplotlib loads only inside these functions, so importing bodyplan stays fast.
"""

from pathlib import Path


def figure_png(fig, path: str | Path | None = None) -> bytes:
    """A matplotlib figure as PNG bytes (150 dpi), written to ``path`` if given; the figure is closed."""
    import io

    import matplotlib.pyplot as plt

    buf = io.BytesIO()
    fig.savefig(buf, format="png", dpi=150)
    plt.close(fig)
    data = buf.getvalue()
    if path is not None:
        Path(path).write_bytes(data)
    return data
