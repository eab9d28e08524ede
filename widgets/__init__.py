"""cubeloupe's Jupyter widgets: a linked sky view, spectrum view, line overlay, moment maps and measurements.

``Loupe`` composes the parts; each part can also be used on its own. Widgets
hold state and display only: every number they show comes from
`cubeloupe.analysis`.
"""

from .status import StatusLine
from .sky_view import SkyView
from .channel_bar import ChannelBar
from .region_list import RegionList
from .spectrum_view import SpectrumView
from .line_overlay import LineOverlay
from .moment_panel import MomentPanel
from .measurement_table import MeasurementTable
from .smoothing_choice import SmoothingChoice
from .fit_panel import FitPanel
from .channel_map_panel import ChannelMapPanel
from .pv_panel import PVPanel
from .path_tool import PathTool
from .excitation_panel import ExcitationPanel
from .loupe import Loupe

__all__ = [
    "Loupe",
    "StatusLine",
    "SkyView",
    "ChannelBar",
    "RegionList",
    "SpectrumView",
    "LineOverlay",
    "MomentPanel",
    "MeasurementTable",
    "SmoothingChoice",
    "FitPanel",
    "ChannelMapPanel",
    "PVPanel",
    "PathTool",
    "ExcitationPanel",
]
