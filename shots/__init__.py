"""shots: a GPU-free batch renderer for consistent catalog images of glTF 2.0 product models.

The stages, in the order data flows through them:

- ``shots.gltf``      glTF/GLB file → ``Scene`` (flat numpy arrays, ``shots.scene``)
- ``shots.accel``     Scene triangles → BVH; batched closest-hit and any-hit ray queries
- ``shots.presets``   TOML preset → validated settings; ``shots.planner`` → one camera per frame
- ``shots.camera``    camera → primary rays
- ``shots.render``    rays → hits → shading (``shots.kernels``) → linear premultiplied RGBA
- ``shots.colour``    exposure, tone map, sRGB, straight alpha
- ``shots.output``    image files written atomically
- ``shots.cli``       the ``shots`` command
"""

import logging

__version__ = "0.3.0"

# A library does not print log records unless its user configures logging (Python logging
# HOWTO, "Configuring Logging for a Library"): no last-resort output to stderr.
logging.getLogger("shots").addHandler(logging.NullHandler())
