"""The validated scenario: typed, immutable, units in every name.

``sim.scenario.reader`` parses and validates a TOML file into these classes; everything downstream
(truth world, engine, recorder) consumes only these. Angles are degrees here (as in the file);
code converts at use. Times are seconds since ``RunConfig.epoch_utc`` unless a name says otherwise.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Any, Mapping

# ------------------------------------------------------------------------------------------
# Environment
# ------------------------------------------------------------------------------------------

ATMOSPHERE_MODELS = ("nrlmsise00", "dtm2000", "jb2008", "harris_priester", "none")
SOLAR_ACTIVITY_SOURCES = ("cssi", "file", "constant")
PRESETS = ("full", "ideal")


@dataclass(frozen=True)
class SolarActivityConfig:
    """Solar and geomagnetic drivers of the truth atmosphere.

    Attributes
    ----------
    source : str
        ``"cssi"`` (the CSSI space-weather file in the Orekit data), ``"file"`` (a user's
        CSSI-format file at ``path``) or ``"constant"`` (the three values below).
    path : str or None
        CSSI-format file for ``source = "file"``.
    f107_sfu, f107a_sfu, ap : float
        Constant daily F10.7, 81-day mean F10.7 (solar flux units) and daily Ap, for
        ``source = "constant"``.
    """

    source: str = "cssi"
    path: str | None = None
    f107_sfu: float = 150.0
    f107a_sfu: float = 150.0
    ap: float = 15.0


@dataclass(frozen=True)
class DensityErrorConfig:
    """Truth density scale error (model error the guidance does not know about).

    The truth density is the model's times ``1 + bias + GM(t)``, with GM a first-order
    Gauss-Markov process of 1-sigma ``sigma`` and time constant ``tau_s`` (0 sigma = off).
    """

    bias: float = 0.0
    sigma: float = 0.0
    tau_s: float = 86400.0


@dataclass(frozen=True)
class EnvironmentConfig:
    """Force models of the truth world."""

    preset: str = "full"
    gravity_degree: int = 20
    gravity_order: int = 20
    atmosphere: str = "nrlmsise00"
    local_solar_time: str = "mean"  # NRLMSISE-00 local-time mode: "mean" (reference code) or "apparent"
    solar_activity: SolarActivityConfig = field(default_factory=SolarActivityConfig)
    sun: bool = True
    moon: bool = True
    srp: bool = True
    position_tolerance_m: float = 1.0
    density_error: DensityErrorConfig = field(default_factory=DensityErrorConfig)


# ------------------------------------------------------------------------------------------
# Spacecraft
# ------------------------------------------------------------------------------------------


@dataclass(frozen=True)
class PanelConfig:
    """A fixed flat panel (e.g. a body-fixed solar array), one-sided area in body axes."""

    area_m2: float
    normal_body: tuple[float, float, float]
    double_sided: bool = True


@dataclass(frozen=True)
class GeometryConfig:
    """Drag and SRP geometry.

    ``kind = "box"``: a rectangular box ``box_x_m, box_y_m, box_z_m`` (body axes) plus ``panels``;
    the ram-facing area follows the attitude.
    ``kind = "table"``: a cross-section area per attitude mode (``area_by_mode_m2``), drag applied
    isotropically with that area while the mode is held.
    """

    kind: str = "box"
    box_x_m: float = 0.1
    box_y_m: float = 0.2
    box_z_m: float = 0.3405
    panels: tuple[PanelConfig, ...] = ()
    area_by_mode_m2: Mapping[str, float] = field(default_factory=dict)
    srp_area_m2: float | None = None  # for "table": SRP area (default: nominal-mode area)


@dataclass(frozen=True)
class AttitudeModeConfig:
    """One attitude mode: body axes relative to the VNC local orbital frame.

    The body frame is obtained from VNC (X along velocity, Y along the orbit normal, Z completing)
    by successive rotations ``rotation_xyz_deg`` about X, Y, Z (Cardan XYZ order).
    """

    name: str
    rotation_xyz_deg: tuple[float, float, float] = (0.0, 0.0, 0.0)


@dataclass(frozen=True)
class ThrusterConfig:
    """Impulsive thruster (see ``guidance.interface.ThrusterCaps`` for meanings)."""

    dv_max_per_burn_mps: float = 0.05
    min_impulse_bit_Ns: float = 1e-4
    isp_s: float = 60.0
    propellant_kg: float = 0.2


@dataclass(frozen=True)
class BusConfig:
    """A spacecraft type, shared by any number of spacecraft."""

    name: str
    mass_kg: float
    cd: float = 2.2
    cr: float = 1.3
    slew_time_s: float = 120.0
    geometry: GeometryConfig = field(default_factory=GeometryConfig)
    modes: Mapping[str, AttitudeModeConfig] = field(default_factory=dict)
    thruster: ThrusterConfig | None = None


@dataclass(frozen=True)
class MeanOrbitConfig:
    """Chief (or absolute deputy) orbit as *mean* elements (Eckstein-Hechler mean, TOD frame).

    ``a_m`` is resolved from ``a_km`` or ``altitude_km`` (over the Earth's equatorial radius);
    ``i_deg`` from ``sun_synchronous = true`` when not given. ``u_deg`` is the mean argument of
    latitude (argument of perigee plus mean anomaly).
    """

    a_m: float
    e: float
    i_deg: float
    raan_deg: float
    argp_deg: float
    u_deg: float
    sun_synchronous: bool = False


@dataclass(frozen=True)
class SpacecraftConfig:
    """One spacecraft in the run.

    Exactly one of ``orbit`` (absolute mean elements) and ``roe_m`` (mean ROE relative to the
    chief, a-scaled metres, order da, dlambda, dex, dey, dix, diy) is set for a deputy; the chief
    has ``orbit``.
    """

    name: str
    bus: BusConfig
    initial_mode: str = "nominal"
    orbit: MeanOrbitConfig | None = None
    roe_m: tuple[float, float, float, float, float, float] | None = None
    target_roe_m: tuple[float, float, float, float, float, float] | None = None
    deadline_s: float | None = None


# ------------------------------------------------------------------------------------------
# Closed loop (navigation, actuators, guidance): consumed by the engine
# ------------------------------------------------------------------------------------------


@dataclass(frozen=True)
class ErrorAxesConfig:
    """Error model on three RTN axes: white noise, constant bias, first-order Gauss-Markov."""

    white_sigma: tuple[float, float, float] = (0.0, 0.0, 0.0)
    bias_sigma: tuple[float, float, float] = (0.0, 0.0, 0.0)
    gm_sigma: tuple[float, float, float] = (0.0, 0.0, 0.0)
    gm_tau_s: tuple[float, float, float] = (600.0, 600.0, 600.0)


@dataclass(frozen=True)
class NavErrorConfig:
    """Navigation error of one kind (absolute or relative)."""

    position_m: ErrorAxesConfig = field(default_factory=ErrorAxesConfig)
    velocity_mps: ErrorAxesConfig = field(default_factory=ErrorAxesConfig)
    update_s: float = 10.0
    outages_s: tuple[tuple[float, float], ...] = ()  # (start, end) intervals without updates


@dataclass(frozen=True)
class NavigationConfig:
    perfect: bool = True
    absolute: NavErrorConfig = field(default_factory=NavErrorConfig)
    relative: NavErrorConfig = field(default_factory=NavErrorConfig)


@dataclass(frozen=True)
class ActuatorConfig:
    perfect: bool = True
    dv_scale_sigma: float = 0.0  # proportional magnitude error, 1-sigma
    dv_fixed_sigma_mps: float = 0.0  # fixed magnitude error, 1-sigma
    pointing_sigma_deg: float = 0.0
    time_sigma_s: float = 0.0
    drag_area_sigma: float = 0.0  # realised drag-area error per mode, relative 1-sigma
    attitude_sigma_deg: float = 0.0  # attitude pointing error changing the ram-facing area


@dataclass(frozen=True)
class GuidanceConfig:
    law: str = "none"  # a built-in name or "package.module:ClassName"; "none" = free drift
    cycle_s: float = 5400.0
    settings: Mapping[str, Any] = field(default_factory=dict)


# ------------------------------------------------------------------------------------------
# Run
# ------------------------------------------------------------------------------------------


@dataclass(frozen=True)
class EventsConfig:
    min_altitude_km: float = 150.0
    keep_out_radius_m: float = 0.0  # 0 = off
    min_rn_separation_m: float = 0.0  # passive-safety monitor threshold (radial/normal), 0 = off


@dataclass(frozen=True)
class MetricsConfig:
    """How a run is judged (sim.judge.metrics).

    ``tolerance_m``: half-widths of the tolerance box on the mean-ROE error (truth minus target),
    a-scaled metres, order da, dlambda, dex, dey, dix, diy.
    """

    tolerance_m: tuple[float, float, float, float, float, float] = (10.0,) * 6


@dataclass(frozen=True)
class RunConfig:
    """The whole validated scenario.

    Attributes
    ----------
    name : str
    epoch_utc : str
        ISO 8601 UTC, e.g. ``2025-03-01T00:00:00Z``.
    duration_s : float
    log_step_s : float
        Truth sampling step of the run log, s.
    seed : int
        Run seed; every random source derives its own stream from it (numpy SeedSequence).
    source_text : str
        The scenario file verbatim (stored in the log).
    source_path : str
    overrides : mapping
        Key paths and values applied over the file (``covey run --set``), stored in the log.
    """

    name: str
    epoch_utc: str
    duration_s: float
    log_step_s: float
    seed: int
    environment: EnvironmentConfig
    chief: SpacecraftConfig
    deputies: tuple[SpacecraftConfig, ...]
    events: EventsConfig = field(default_factory=EventsConfig)
    guidance: GuidanceConfig = field(default_factory=GuidanceConfig)
    navigation: NavigationConfig = field(default_factory=NavigationConfig)
    actuators: ActuatorConfig = field(default_factory=ActuatorConfig)
    metrics: MetricsConfig = field(default_factory=MetricsConfig)
    orekit_data: str | None = None
    source_text: str = ""
    source_path: str = ""
    overrides: Mapping[str, Any] = field(default_factory=dict)  # key path -> value applied over the file

    @property
    def spacecraft(self) -> tuple[SpacecraftConfig, ...]:
        """Chief first, then deputies."""
        return (self.chief, *self.deputies)
