"""lampcast: spectral night-time street previews under candidate street lamps.

The package is laid out in the order data flows through it:

scene -> geometry -> rays -> light buffers -> colorimetry -> vision -> images and reports

See DEVELOPERS.md at the repository root for the map of modules.
"""

__version__ = "0.1.0"
