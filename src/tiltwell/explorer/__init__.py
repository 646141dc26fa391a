"""Layer 4, the notebook explorer: ipywidgets controls with Bokeh views (through
``jupyter_bokeh``) in JupyterLab. ``tiltwell.explore()`` opens it; see :mod:`.app`."""

from .app import DEMO, Explorer, explore

__all__ = ["DEMO", "Explorer", "explore"]
