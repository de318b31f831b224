"""Pictures of congest's results: maps of link results and charts of curves and tables.

Every function takes data (a :class:`~congest.network.Network`, an
:class:`~congest.equilibrium.Equilibrium`, arrays or DataFrames) and returns a
:class:`matplotlib.figure.Figure` built without pyplot, so nothing global changes and no
window opens; :func:`save_figure` writes one as PNG, SVG or PDF. matplotlib is imported
inside the functions, so ``import congest`` stays free of it.

Maps: :func:`flow_map`, :func:`difference_map`, :func:`toll_map` (its colour scale
from :func:`toll_scale`), :func:`select_link_map`. Charts: :func:`convergence_chart`,
:func:`sweep_chart`, :func:`learning_chart`, :func:`scenario_chart`.
"""

from ._charts import (
    convergence_chart,
    learning_chart,
    scenario_chart,
    sweep_chart,
)
from ._maps import (
    MAP_LAYERS,
    TOLL_LOG_SPAN,
    change_colormap,
    difference_map,
    flow_map,
    flow_scales,
    load_colormap,
    select_link_flow,
    select_link_map,
    toll_colormap,
    toll_map,
    toll_scale,
)
from ._output import FORMATS, save_figure

__all__ = [
    "flow_map",
    "flow_scales",
    "difference_map",
    "toll_map",
    "select_link_map",
    "select_link_flow",
    "convergence_chart",
    "sweep_chart",
    "learning_chart",
    "scenario_chart",
    "save_figure",
    "load_colormap",
    "toll_colormap",
    "toll_scale",
    "change_colormap",
    "MAP_LAYERS",
    "TOLL_LOG_SPAN",
    "FORMATS",
]
