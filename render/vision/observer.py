"""Who is looking: the observer and display settings of the vision stage.

References
----------
- CIE 146:2002, "CIE equations for disability glare": age and eye pigmentation of the glare
  spread (:mod:`render.vision.glare`; docs/references.md).
- CIE 140:2000 / EN 13201-3:2015: the 23-year observer of the threshold increment
  **(from memory)**, mentioned to explain our different default.
- IEC 61966-2-1:1999: the sRGB reference display white of 80 cd/m².
"""

from __future__ import annotations

from collections.abc import Mapping
from dataclasses import dataclass, fields
from typing import Any

from render.errors import ProblemList, did_you_mean

__all__ = ["GLARE_MODELS", "PIGMENTATION_MAX", "ObserverSettings"]

#: Glare spread functions the vision stage offers (:mod:`render.vision.glare`).
GLARE_MODELS = ("cie146-general", "stiles-holladay")
#: Largest eye pigmentation factor of CIE 146:2002's scale (very light blue eyes).
PIGMENTATION_MAX = 1.2


@dataclass(frozen=True)
class ObserverSettings:
    """Observer and display settings for turning light buffers into images.

    Attributes
    ----------
    age_years
        Observer age, years (CIE 146:2002 glare spread depends on it). Default 40: roughly the
        median age of adult residents (our choice; CIE 140 / EN 13201-3 use 23 years for the
        threshold increment of drivers, which would understate glare for most residents).
    pigmentation
        Eye pigmentation factor p of CIE 146:2002: 0 (very dark eyes), 0.5 (brown), 1.0 (light),
        1.2 (very light blue); the scale is from secondary sources (docs/references.md).
        Default 0.5, brown eyes.
    adaptation_cd_m2
        Photopic adaptation luminance, cd/m², to use instead of the one measured from the view;
        ``None`` measures it (see :mod:`render.vision.adaptation`).
    adaptation_field_deg
        Full angle of the circular central field over which the adaptation luminance is
        averaged, degrees (default 20; our choice, see :mod:`render.vision.adaptation`).
    display_peak_cd_m2
        Luminance of the display's white, cd/m² (sRGB reference display: 80; common office
        monitors 100-300). Default 100.
    acuity
        Apply the low-light loss of acuity (Ward Larson et al. 1997).
    glare
        Add the veiling luminance of disability glare (CIE 146:2002).
    glare_model
        ``"cie146-general"`` (0.1°-100°, age and pigmentation) or ``"stiles-holladay"``
        (CIE 146 age-adjusted Stiles-Holladay, 1°-30°).
    rod_intrusion
        Model the change of colour appearance by rod signals (Cao et al. 2008).
    chromatic_adaptation_degree
        Degree D of adaptation to the scene's white, 0-1; ``None`` computes it from the
        adaptation luminance with the CIECAM02/CAM16 formula (average surround).
    luminaire_threshold_cd_m2
        Pixels brighter than this are treated as luminaire openings and left out of the
        adaptation field (unless the renderer passes an explicit mask). Default 1000 cd/m²:
        well above any lit surface of a street at night, well below LED or discharge lamp
        openings (common practice, no source).
    """

    age_years: float = 40.0
    pigmentation: float = 0.5
    adaptation_cd_m2: float | None = None
    adaptation_field_deg: float = 20.0
    display_peak_cd_m2: float = 100.0
    acuity: bool = True
    glare: bool = True
    glare_model: str = "cie146-general"
    rod_intrusion: bool = True
    chromatic_adaptation_degree: float | None = None
    luminaire_threshold_cd_m2: float = 1000.0

    def __post_init__(self) -> None:
        self.validate()

    def validate(self, source: str = "observer") -> None:
        """Raise :class:`render.errors.InputError` listing every bad setting."""
        p = ProblemList(source)

        def number(key, lo, hi, lo_open=False, allow_none=False):
            v = getattr(self, key)
            if v is None and allow_none:
                return
            ok = isinstance(v, (int, float)) and not isinstance(v, bool)
            if ok:
                v = float(v)
                ok = (v > lo if lo_open else v >= lo) and v <= hi
            if not ok:
                bracket = "(" if lo_open else "["
                p.add(key, f"expected a number in {bracket}{lo:g}, {hi:g}], got {getattr(self, key)!r}")

        number("age_years", 0.0, 120.0)
        number("pigmentation", 0.0, PIGMENTATION_MAX)
        number("adaptation_cd_m2", 0.0, 1e6, lo_open=True, allow_none=True)
        number("adaptation_field_deg", 0.0, 180.0, lo_open=True)
        number("display_peak_cd_m2", 0.0, 1e5, lo_open=True)
        number("chromatic_adaptation_degree", 0.0, 1.0, allow_none=True)
        number("luminaire_threshold_cd_m2", 0.0, 1e12, lo_open=True)
        for key in ("acuity", "glare", "rod_intrusion"):
            if not isinstance(getattr(self, key), bool):
                p.add(key, f"expected true or false, got {getattr(self, key)!r}")
        if self.glare_model not in GLARE_MODELS:
            p.add(
                "glare_model",
                f"expected one of {', '.join(GLARE_MODELS)}, got {self.glare_model!r}"
                + did_you_mean(str(self.glare_model), GLARE_MODELS),
            )
        p.raise_if_any()

    @classmethod
    def from_mapping(
        cls, values: Mapping[str, Any], source: str = "observer", where: str = "observer"
    ) -> ObserverSettings:
        """Build settings from a mapping (e.g. a scene file's ``[observer]`` table).

        Unknown keys and bad values are reported together as one
        :class:`render.errors.InputError` naming ``source`` and ``where.key``.
        """
        names = [f.name for f in fields(cls)]
        p = ProblemList(source)
        for key in values:
            if key not in names:
                p.add(f"{where}.{key}", "unknown setting" + did_you_mean(str(key), names))
        p.raise_if_any()
        try:
            return cls(**dict(values))
        except Exception as exc:  # re-label the problems with the caller's source and key path
            from render.errors import InputError, Problem

            if isinstance(exc, InputError):
                raise InputError([Problem(source, f"{where}.{q.where}", q.message) for q in exc.problems]) from None
            raise
