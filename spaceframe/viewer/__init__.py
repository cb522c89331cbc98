"""A 3D view of the results with PyVista: coloured members, the deformed shape, supports, loads.

Members are drawn as tubes (plain lines beyond :data:`TUBE_LIMIT` members)
coloured by axial force on a diverging map centred on zero (``coolwarm``:
blue end compression, red end tension, the range symmetric), by
displacement magnitude, by stress, by group, or by design utilisation (a
sequential scale 0 to 1 in ten bands, everything above 1 in one distinct
colour, members not checked grey; ``utilisation=`` gives the values).  The deformed shape is drawn
with a scale factor, the undeformed shape faint beside it; supports are cones
under the nodes and loads arrows pointing at them.

In an interactive window, ``n`` / Right and ``b`` / Left step through the load
cases and combinations (a slider does the same), and ``p`` over a member or
node shows its figures.  Mode shapes (buckling, vibration) are shown by
:func:`show_modes` with a second slider for their amplitude, and pictured by
:func:`mode_pictures`; a load path by :func:`show_path`, a step per
result.  Everything renders off-screen as well, for
:func:`screenshot` and for tests; PyVista is imported inside the functions.
"""

from spaceframe.results.summary import auto_scale
from spaceframe.viewer.modes import (
    ModeScene,
    mode_animation,
    mode_pictures,
    mode_results,
    self_stress_results,
    show_modes,
)
from spaceframe.viewer.paths import path_results, show_path
from spaceframe.viewer.pictures import (
    PICTURE_CHOICES,
    screenshot,
    screenshots,
    select_cases,
    with_envelopes,
)
from spaceframe.viewer.scene import (
    COLOR_BY,
    MAX_ARROWS,
    MAX_CONES,
    TUBE_LIMIT,
    UTILISATION_BANDS,
    UTILISATION_OVER,
    UTILISATION_STOPS,
    VIEWS,
    FrameScene,
    Writer,
    build_plotter,
    build_scene,
    show,
)

__all__ = [
    "COLOR_BY",
    "MAX_ARROWS",
    "MAX_CONES",
    "PICTURE_CHOICES",
    "TUBE_LIMIT",
    "UTILISATION_BANDS",
    "UTILISATION_OVER",
    "UTILISATION_STOPS",
    "VIEWS",
    "FrameScene",
    "ModeScene",
    "Writer",
    "auto_scale",
    "build_plotter",
    "build_scene",
    "mode_animation",
    "mode_pictures",
    "mode_results",
    "path_results",
    "screenshot",
    "screenshots",
    "select_cases",
    "self_stress_results",
    "show",
    "show_modes",
    "show_path",
    "with_envelopes",
]
