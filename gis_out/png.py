"""Writing a matplotlib figure to PNG safely (temporary file in the target folder, then an atomic rename)."""
from __future__ import annotations

import os
import uuid
from pathlib import Path

import matplotlib

matplotlib.use("Agg")
import matplotlib.pyplot as plt  # noqa: E402  (after choosing the backend)


def save_png(fig, path, dpi: int = 150) -> Path:
    """Write the figure as a PNG through a temporary file beside `path` and an atomic rename; close the figure.

    A failure leaves no partial file and any earlier PNG at `path` untouched. Returns the absolute path written.
    """
    final = Path(path).resolve()
    tmp = final.with_name(f".{final.name}.{uuid.uuid4().hex}.tmp")
    try:
        fig.savefig(tmp, dpi=dpi, format="png")
        os.replace(tmp, final)
    except BaseException:
        tmp.unlink(missing_ok=True)
        raise
    finally:
        plt.close(fig)
    return final
