"""Energy figures of a lighting setup: input power, dimming schedules, annual kWh, cost and CO₂.

The model, stated once:

* **Input power** ``P`` (W per luminaire) is the photometric file's input watts (ANSI/IES LM-63
  "input watts", EULUMDAT "total system watts") or a figure the user gives, which wins. The
  file's watts belong to the file's rated output; a lumens override in the scene does not
  rescale them (give the watts when the scene changes the lumens).
* **Dimming schedule**: steps ``(start_h, end_h, level)`` in hours after dusk over a nominal
  night of ``night_hours`` (default 12 h); ``level`` is the light output, 0..1, and hours no step
  covers run at full output. Part-night dimming is a step with 0 < level < 1, switch-off a step
  with level 0.
* **Power model**: the power drawn at light level ``L`` is ``P·f(L)`` with
  ``f(L) = m + (1 − m)·L`` for ``L > 0`` and ``f(0) = 0`` (switched off, no standby draw), where
  ``m`` is the minimum power fraction (default 0: power proportional to light output). A driver
  that still draws 10 % at its lowest dimming level is ``m = 0.1``.
* **Annual burning hours**: the user's dusk-to-dawn hours per year, default 4100 h
  (**common practice, no source**: roughly the night hours of a mid-latitude year, with the
  switching thresholds of a photocell; give the figure for the site).
* **Annual energy** per luminaire ``E = P · h · f̄ / 1000`` kWh, with ``f̄`` the mean of ``f``
  over the night; per setup times the number of luminaires. Cost = E × tariff (currency per
  kWh); CO₂ = E × grid factor (kg per kWh).
* **Maintenance factor and lifetime**: without constant-light-output (CLO) control a luminaire
  runs at full power all its life and its light falls to the maintenance factor ``MF`` by the
  end (the design is made for that end-of-life light, so energy is unchanged). With CLO it starts
  dimmed to ``MF`` and rises linearly to full power at the end of life, so its mean power over the
  life is ``(1 + MF)/2`` of full (a linear depreciation, **from memory**, the usual simple
  model). The lifetime in hours gives the life in years (lifetime ÷ annual burning hours) and the
  energy over the life.

**A setup's energy** (:func:`setup_energy`): the scene's luminaires are grouped by input power
and light level. A luminaire's input power is the setup's ``input_watts`` (per group, else for
all), otherwise its photometric file's input watts; when the setup or the scene sets lumens
other than the file's rated flux, the file's watts are scaled by lumens/rated flux (constant
efficacy, labelled so in the result, as an estimate). Its light level over the night is the
setup's ``schedule`` when given (levels are fractions of the luminaire's full output, so a
setup that shows the dimmed state keeps the night's real schedule), otherwise the setup's
dimming all night. Luminaires whose power is unknown leave the setup's energy "not computed",
with the reason.

References
----------
- ANSI/IESNA LM-63-2002 and IES LM-63-2019: input watts and ballast factor of a photometric
  file **(from memory)**.
- EN 13201-5:2015, "Road lighting -- Part 5: Energy performance indicators": annual energy from
  power, operating hours and dimming profile **(from memory)**; lampcast computes kWh, not the
  standard's PDI/AECI indicators.
- CIE 154:2003, "The maintenance of outdoor lighting systems": the maintenance factor
  **(from memory)**.
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from dataclasses import asdict, dataclass
from typing import Any

from render.errors import input_error
from render.light.photometry.model import Photometry

__all__ = [
    "DEFAULT_ANNUAL_BURNING_HOURS",
    "DEFAULT_NIGHT_HOURS",
    "DimmingSchedule",
    "DimmingStep",
    "EnergyDifference",
    "EnergyInputs",
    "EnergyResult",
    "LuminairePower",
    "SetupEnergy",
    "annual_energy",
    "setup_energy",
    "energy_difference",
    "input_watts",
    "mean_power_fraction",
    "power_fraction",
]

#: Dusk-to-dawn hours per year when the user gives none: common practice, no source.
DEFAULT_ANNUAL_BURNING_HOURS = 4100.0
#: Nominal length of the night over which a dimming schedule is given, hours.
DEFAULT_NIGHT_HOURS = 12.0


@dataclass(frozen=True)
class DimmingStep:
    """Light output ``level`` (0..1) from ``start_h`` to ``end_h`` hours after dusk."""

    start_h: float
    end_h: float
    level: float

    def to_json(self) -> dict[str, float]:
        return asdict(self)


@dataclass(frozen=True)
class DimmingSchedule:
    """Steps over a night of ``night_hours``; uncovered hours run at full output.

    ``minimum_power_fraction`` is ``m`` of the power model (module docstring)."""

    steps: tuple[DimmingStep, ...] = ()
    night_hours: float = DEFAULT_NIGHT_HOURS
    minimum_power_fraction: float = 0.0

    @classmethod
    def from_tuples(
        cls,
        steps: Sequence[tuple[float, float, float]],
        night_hours: float = DEFAULT_NIGHT_HOURS,
        minimum_power_fraction: float = 0.0,
        source: str = "dimming schedule",
    ) -> DimmingSchedule:
        """A checked schedule from ``(start_h, end_h, level)`` tuples; a mistake raises
        :class:`render.errors.InputError` naming ``source`` and the step."""
        if not (math.isfinite(night_hours) and 0.0 < night_hours <= 24.0):
            raise input_error(source, "night_hours", "expected hours in (0, 24]")
        if not (math.isfinite(minimum_power_fraction) and 0.0 <= minimum_power_fraction <= 1.0):
            raise input_error(source, "minimum_power_fraction", "expected a fraction in [0, 1]")
        out: list[DimmingStep] = []
        for i, item in enumerate(steps):
            try:
                start, end, level = (float(v) for v in item)
            except (TypeError, ValueError):
                raise input_error(source, f"steps[{i}]", "expected (start hour, end hour, level)") from None
            if not (math.isfinite(start) and math.isfinite(end) and 0.0 <= start < end <= night_hours):
                raise input_error(
                    source, f"steps[{i}]", f"expected 0 <= start hour < end hour <= {night_hours:g} (hours after dusk)"
                )
            if not (math.isfinite(level) and 0.0 <= level <= 1.0):
                raise input_error(source, f"steps[{i}]", "expected a dimming level in [0, 1]")
            out.append(DimmingStep(start, end, level))
        out.sort(key=lambda s: s.start_h)
        for a, b in zip(out, out[1:], strict=False):
            if b.start_h < a.end_h:
                raise input_error(source, "steps", f"steps overlap at {b.start_h:g} h after dusk")
        return cls(tuple(out), float(night_hours), float(minimum_power_fraction))

    def to_json(self) -> dict[str, Any]:
        return {
            "steps": [s.to_json() for s in self.steps],
            "night_hours": self.night_hours,
            "minimum_power_fraction": self.minimum_power_fraction,
        }


def power_fraction(level: float, minimum_power_fraction: float = 0.0) -> float:
    """``f(L)``: the fraction of full input power drawn at light level ``L`` (module docstring)."""
    if level <= 0.0:
        return 0.0
    return minimum_power_fraction + (1.0 - minimum_power_fraction) * level


def mean_power_fraction(schedule: DimmingSchedule) -> float:
    """Mean of ``f`` over the night: hours not covered by a step count at full power."""
    covered = sum(s.end_h - s.start_h for s in schedule.steps)
    weighted = sum(
        (s.end_h - s.start_h) * power_fraction(s.level, schedule.minimum_power_fraction) for s in schedule.steps
    )
    return (weighted + (schedule.night_hours - covered)) / schedule.night_hours


def input_watts(photometry: Photometry | None, given_w: float | None = None, source: str = "energy") -> float:
    """Input power per luminaire, W: ``given_w`` when given, else the photometric file's input
    watts. Neither (or a non-positive figure) raises :class:`render.errors.InputError`."""
    if given_w is not None:
        if not (math.isfinite(given_w) and given_w > 0.0):
            raise input_error(source, "input_watts", "expected a positive number of watts")
        return float(given_w)
    if photometry is not None and math.isfinite(photometry.input_watts) and photometry.input_watts > 0.0:
        return float(photometry.input_watts)
    name = photometry.name if photometry is not None else "the luminaire"
    raise input_error(source, "input_watts", f"{name} gives no input watts; give the luminaire's input power")


@dataclass(frozen=True)
class EnergyInputs:
    """What the energy figures of one setup depend on (units in the names)."""

    input_watts_w: float
    n_luminaires: int = 1
    schedule: DimmingSchedule = DimmingSchedule()
    annual_burning_hours_h: float = DEFAULT_ANNUAL_BURNING_HOURS
    tariff_per_kwh: float = 0.0
    grid_factor_kg_per_kwh: float = 0.0
    maintenance_factor: float = 1.0
    constant_light_output: bool = False
    lifetime_h: float | None = None

    def to_json(self) -> dict[str, Any]:
        out = asdict(self)
        out["schedule"] = self.schedule.to_json()
        return out


@dataclass(frozen=True)
class EnergyResult:
    """Annual energy figures of one setup; cost in the tariff's currency, CO₂ in kg."""

    inputs: EnergyInputs
    mean_power_fraction: float
    lifetime_power_fraction: float
    annual_kwh_per_luminaire: float
    annual_kwh: float
    annual_cost: float
    annual_co2_kg: float
    lifetime_years: float | None
    lifetime_kwh_per_luminaire: float | None

    def to_json(self) -> dict[str, Any]:
        out = asdict(self)
        out["inputs"] = self.inputs.to_json()
        return out


def annual_energy(inputs: EnergyInputs, source: str = "energy") -> EnergyResult:
    """The energy figures of one setup (model in the module docstring)."""
    checks = {
        "input_watts": inputs.input_watts_w > 0.0,
        "annual_burning_hours": 0.0 <= inputs.annual_burning_hours_h <= 8784.0,
        "tariff": inputs.tariff_per_kwh >= 0.0,
        "grid_factor": inputs.grid_factor_kg_per_kwh >= 0.0,
        "maintenance_factor": 0.0 < inputs.maintenance_factor <= 1.0,
        "n_luminaires": inputs.n_luminaires >= 0,
    }
    for key, ok in checks.items():
        value = {
            "input_watts": inputs.input_watts_w,
            "annual_burning_hours": inputs.annual_burning_hours_h,
            "tariff": inputs.tariff_per_kwh,
            "grid_factor": inputs.grid_factor_kg_per_kwh,
            "maintenance_factor": inputs.maintenance_factor,
            "n_luminaires": inputs.n_luminaires,
        }[key]
        if not (math.isfinite(value) and ok):
            raise input_error(source, key, f"value {value!r} is out of range")
    if inputs.lifetime_h is not None and not (math.isfinite(inputs.lifetime_h) and inputs.lifetime_h > 0.0):
        raise input_error(source, "lifetime_h", "expected a positive number of hours")
    night = mean_power_fraction(inputs.schedule)
    life = (1.0 + inputs.maintenance_factor) / 2.0 if inputs.constant_light_output else 1.0
    per_lum = inputs.input_watts_w * inputs.annual_burning_hours_h * night * life / 1000.0
    total = per_lum * inputs.n_luminaires
    years = None
    life_kwh = None
    if inputs.lifetime_h is not None and inputs.annual_burning_hours_h > 0.0:
        years = inputs.lifetime_h / inputs.annual_burning_hours_h
        life_kwh = per_lum * years
    return EnergyResult(
        inputs=inputs,
        mean_power_fraction=night,
        lifetime_power_fraction=life,
        annual_kwh_per_luminaire=per_lum,
        annual_kwh=total,
        annual_cost=total * inputs.tariff_per_kwh,
        annual_co2_kg=total * inputs.grid_factor_kg_per_kwh,
        lifetime_years=years,
        lifetime_kwh_per_luminaire=life_kwh,
    )


@dataclass(frozen=True)
class EnergyDifference:
    """``option − before`` of the annual figures (negative = a saving)."""

    annual_kwh: float
    annual_cost: float
    annual_co2_kg: float
    relative: float | None

    def to_json(self) -> dict[str, Any]:
        return asdict(self)


def energy_difference(before: EnergyResult | SetupEnergy, option: EnergyResult | SetupEnergy) -> EnergyDifference:
    """Annual kWh, cost and CO₂ of ``option`` minus ``before``; ``relative`` is the kWh change
    as a fraction of ``before`` (``None`` when ``before`` uses none)."""
    d = option.annual_kwh - before.annual_kwh
    return EnergyDifference(
        annual_kwh=d,
        annual_cost=option.annual_cost - before.annual_cost,
        annual_co2_kg=option.annual_co2_kg - before.annual_co2_kg,
        relative=d / before.annual_kwh if before.annual_kwh > 0.0 else None,
    )


@dataclass(frozen=True)
class LuminairePower:
    """Luminaires of one setup that draw the same power at the same light level."""

    group: str
    count: int
    input_watts_w: float
    watts_source: str  # "setup", "photometric file" or "photometric file scaled to lumens"
    dimming: float  # the light level without a schedule
    maintenance_factor: float = 1.0


@dataclass(frozen=True)
class SetupEnergy:
    """A setup's annual energy: one :class:`EnergyResult` per :class:`LuminairePower` part and
    their sums (cost in ``currency``, CO₂ in kg)."""

    setup: str | None
    parts: tuple[LuminairePower, ...]
    results: tuple[EnergyResult, ...]
    annual_kwh: float
    annual_cost: float
    currency: str
    annual_co2_kg: float
    installed_watts_w: float
    lifetime_years: float | None

    def to_json(self) -> dict[str, Any]:
        return {
            "setup": self.setup,
            "parts": [asdict(p) for p in self.parts],
            "results": [r.to_json() for r in self.results],
            "annual_kwh": self.annual_kwh,
            "annual_cost": self.annual_cost,
            "currency": self.currency,
            "annual_co2_kg": self.annual_co2_kg,
            "installed_watts_w": self.installed_watts_w,
            "lifetime_years": self.lifetime_years,
        }


def setup_energy(
    parts: Sequence[LuminairePower],
    schedule_steps: Sequence[tuple[float, float, float]],
    *,
    setup: str | None = None,
    annual_burning_hours_h: float = DEFAULT_ANNUAL_BURNING_HOURS,
    night_hours: float = DEFAULT_NIGHT_HOURS,
    tariff_per_kwh: float = 0.0,
    currency: str = "",
    grid_factor_kg_per_kwh: float = 0.0,
    lifetime_h: float | None = None,
    constant_light_output: bool = False,
    minimum_power_fraction: float = 0.0,
    source: str = "energy",
) -> SetupEnergy:
    """The annual energy of a setup's luminaire parts (model in the module text): with
    ``schedule_steps`` every part follows that schedule, otherwise its own dimming all night."""
    if not parts:
        raise input_error(source, "luminaires", "no luminaires: nothing draws power")
    results = []
    for part in parts:
        steps = (
            list(schedule_steps) if schedule_steps else ([(0.0, night_hours, part.dimming)] if part.dimming < 1 else [])
        )
        schedule = DimmingSchedule.from_tuples(steps, night_hours, minimum_power_fraction, source=source)
        results.append(
            annual_energy(
                EnergyInputs(
                    input_watts_w=part.input_watts_w,
                    n_luminaires=part.count,
                    schedule=schedule,
                    annual_burning_hours_h=annual_burning_hours_h,
                    tariff_per_kwh=tariff_per_kwh,
                    grid_factor_kg_per_kwh=grid_factor_kg_per_kwh,
                    maintenance_factor=part.maintenance_factor,
                    constant_light_output=constant_light_output,
                    lifetime_h=lifetime_h,
                ),
                source,
            )
        )
    return SetupEnergy(
        setup=setup,
        parts=tuple(parts),
        results=tuple(results),
        annual_kwh=sum(r.annual_kwh for r in results),
        annual_cost=sum(r.annual_cost for r in results),
        currency=currency,
        annual_co2_kg=sum(r.annual_co2_kg for r in results),
        installed_watts_w=sum(p.input_watts_w * p.count for p in parts),
        lifetime_years=results[0].lifetime_years,
    )
