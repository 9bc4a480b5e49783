"""Nonlinear equations of motion behind the bundled sample plants.

Each bundled plant file in ``sample_plants/`` is a linearisation of a physical
model stated in its ``description``. This module writes those models down again,
from first principles and in their nonlinear form, so that the tests can check
the files numerically: central finite differences of these equations at the
stated operating point must reproduce A, B (and C, D, the disturbance matrix
where the file gives them).

The equations are deliberately written in physical (absolute) variables, with
the operating point obtained from the equilibrium conditions, and never from
the matrices in the files: a wrong sign, a wrong factor of two or a stale number
in a file then shows up as a mismatch rather than being copied into both sides.

Every model follows one calling convention:

``dynamics(x, u, d) -> dx/dt``
    x, u, d are 1-D float arrays (state, input, disturbance) in the same units as
    the plant file, but absolute rather than deviations from the operating point.
``outputs(x, u) -> y``
    The measured outputs in the file's output units.

The file's state, input and output are the deviations ``x - operating_state``,
``u - operating_input`` and ``y - outputs(operating_state, operating_input)``.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Callable

import numpy as np

__all__ = [
    "NonlinearModel",
    "NONLINEAR_MODELS",
    "GRAVITY",
    "STEFAN_BOLTZMANN",
    "ARM_PARAMETERS",
    "CAR_PARAMETERS",
    "POT_PARAMETERS",
    "TANK_PARAMETERS",
    "STAGE_PARAMETERS",
]

#: Acceleration of gravity used by every sample plant, m/s²: the standard 9.80665 (CGPM 1901) rounded.
GRAVITY = 9.81
#: Stefan–Boltzmann constant, W/(m²·K⁴) (CODATA 2018: 5.670374419e-8).
STEFAN_BOLTZMANN = 5.670374419e-8


@dataclass(frozen=True)
class NonlinearModel:
    """A nonlinear state equation with its operating point.

    Attributes
    ----------
    stem : str
        Stem of the plant file this model stands behind.
    dynamics : callable
        ``dynamics(x, u, d)`` returning dx/dt, shape (n,).
    outputs : callable
        ``outputs(x, u)`` returning y, shape (p,).
    operating_state : numpy.ndarray, shape (n,)
        Absolute state at the operating point.
    operating_input : numpy.ndarray, shape (m,)
        Absolute input that holds the operating point.
    disturbance_count : int
        Number of disturbance channels ``d`` that ``dynamics`` accepts.
    state_scale : numpy.ndarray, shape (n,)
        A typical size of each state (sets the finite-difference step).
    input_scale : numpy.ndarray, shape (m,)
        A typical size of each input.
    actuator_range : tuple of (low, high) pairs
        Absolute range of each input (the physical actuator limits).
    sample_time : float or None
        For a plant file that is the ZOH sampling of this continuous model.
    """

    stem: str
    dynamics: Callable[[np.ndarray, np.ndarray, np.ndarray], np.ndarray]
    outputs: Callable[[np.ndarray, np.ndarray], np.ndarray]
    operating_state: np.ndarray
    operating_input: np.ndarray
    disturbance_count: int
    state_scale: np.ndarray
    input_scale: np.ndarray
    actuator_range: tuple[tuple[float, float], ...]
    sample_time: float | None = None


def _array(*values) -> np.ndarray:
    return np.array(values, dtype=float)


# -- steel ball under an electromagnet -----------------------------------------------------------
# Newton's second law for the ball (gap z measured downward from the pole face, so gravity
# opens the gap and the magnet closes it), magnet force κ i²/z² (the usual lumped
# reluctance approximation, from memory), and Kirchhoff's voltage law for the coil with a
# constant inductance.
def _maglev_model() -> NonlinearModel:
    mass, kappa, resistance, inductance = 0.052, 2.4e-5, 5.8, 0.18
    hover_gap = 0.010
    g = GRAVITY
    # Hover: κ i0²/z0² = m g.
    hover_current = hover_gap * math.sqrt(mass * g / kappa)

    def dynamics(x, u, d):
        gap, speed, current = x
        (voltage,) = u
        acceleration = g - kappa * current**2 / (mass * gap**2)
        return _array(speed, acceleration, (voltage - resistance * current) / inductance)

    def outputs(x, u):
        return _array(1000.0 * x[0], x[2])  # gap in mm, coil current in A

    return NonlinearModel(
        stem="maglev_ball",
        dynamics=dynamics,
        outputs=outputs,
        operating_state=_array(hover_gap, 0.0, hover_current),
        operating_input=_array(resistance * hover_current),
        disturbance_count=0,
        state_scale=_array(0.01, 0.1, 1.0),
        input_scale=_array(10.0),
        actuator_range=((0.0, 24.0),),
    )


# -- rod balanced on a cart ----------------------------------------------------------------------
# Lagrange's equations (equivalently Newton's second law for cart and rod) for a uniform rod
# pivoted on a cart; θ from upright, positive toward +p. Viscous cart friction, viscous pivot
# friction. The rod's inertia about its centre is m L²/12 (uniform rod, any mechanics handbook).
def _cart_pendulum_model() -> NonlinearModel:
    cart_mass, rod_mass, rod_length = 1.35, 0.21, 0.62
    cart_friction, pivot_friction = 4.2, 0.0015
    g = GRAVITY
    half = rod_length / 2
    inertia_centre = rod_mass * rod_length**2 / 12

    def dynamics(x, u, d):
        _, speed, angle, rate = x
        (force,) = u
        c, s = math.cos(angle), math.sin(angle)
        # [[M+m, m l c], [m l c, I+m l²]] [p'', θ''] = [F - b p' + m l s θ'², m g l s - c_p θ']
        mass_matrix = np.array(
            [[cart_mass + rod_mass, rod_mass * half * c], [rod_mass * half * c, inertia_centre + rod_mass * half**2]]
        )
        forcing = np.array(
            [
                force - cart_friction * speed + rod_mass * half * s * rate**2,
                rod_mass * g * half * s - pivot_friction * rate,
            ]
        )
        cart_acceleration, angular_acceleration = np.linalg.solve(mass_matrix, forcing)
        return _array(speed, cart_acceleration, rate, angular_acceleration)

    def outputs(x, u):
        return _array(x[0], math.degrees(x[2]))

    return NonlinearModel(
        stem="cart_pendulum",
        dynamics=dynamics,
        outputs=outputs,
        operating_state=_array(0.0, 0.0, 0.0, 0.0),
        operating_input=_array(0.0),
        disturbance_count=0,
        state_scale=_array(1.0, 1.0, 0.1, 1.0),
        input_scale=_array(10.0),
        actuator_range=((-15.0, 15.0),),
    )


# -- two carts joined by a spring ----------------------------------------------------------------
# Newton's second law for each cart; a hardening coupling spring k δ + k3 δ³ (δ = stretch),
# a light damper across the spring, viscous rail friction and quadratic air drag on each cart.
def _spring_carts_model() -> NonlinearModel:
    drive_mass, load_mass = 0.9, 0.55
    stiffness, hardening, coupling_damping = 180.0, 2.0e4, 0.25
    drive_friction, load_friction, drag = 1.1, 0.15, 0.02

    def dynamics(x, u, d):
        drive_pos, drive_speed, load_pos, load_speed = x
        (force,) = u
        stretch = load_pos - drive_pos
        coupling = stiffness * stretch + hardening * stretch**3 + coupling_damping * (load_speed - drive_speed)
        drive_acc = (force + coupling - drive_friction * drive_speed - drag * drive_speed * abs(drive_speed)) / drive_mass
        load_acc = (-coupling - load_friction * load_speed - drag * load_speed * abs(load_speed)) / load_mass
        return _array(drive_speed, drive_acc, load_speed, load_acc)

    def outputs(x, u):
        return _array(x[2], x[0])

    return NonlinearModel(
        stem="spring_coupled_carts",
        dynamics=dynamics,
        outputs=outputs,
        operating_state=_array(0.0, 0.0, 0.0, 0.0),
        operating_input=_array(0.0),
        disturbance_count=0,
        state_scale=_array(0.1, 1.0, 0.1, 1.0),
        input_scale=_array(5.0),
        actuator_range=((-20.0, 20.0),),
    )


# -- two connected tanks with two pumps ----------------------------------------------------------
# Mass balance (conservation of volume, incompressible water) for each tank and Torricelli's law
# q = a·sqrt(2 g Δh) for the outlets and the connecting pipe (a = effective orifice area, the
# discharge coefficient folded in). Pump flow proportional to pump voltage.
TANK_PARAMETERS = dict(
    area_1=0.020, area_2=0.015, outlet_1=3.0e-5, outlet_2=6.0e-5, link=5.0e-5, pump_gain=2.0e-5,
    level_1=0.40, level_2=0.25,
)


def _orifice_flow(area: float, head: float) -> float:
    """Torricelli's law with the sign of the head (flow from high to low)."""
    return math.copysign(area * math.sqrt(2 * GRAVITY * abs(head)), head)


def _twin_tank_model() -> NonlinearModel:
    p = TANK_PARAMETERS

    def dynamics(x, u, d):
        h1, h2 = x
        v1, v2 = u
        link_flow = _orifice_flow(p["link"], h1 - h2)
        out_1 = _orifice_flow(p["outlet_1"], h1)
        out_2 = _orifice_flow(p["outlet_2"], h2)
        return _array(
            (p["pump_gain"] * v1 - link_flow - out_1) / p["area_1"],
            (p["pump_gain"] * v2 + link_flow - out_2) / p["area_2"],
        )

    def outputs(x, u):
        return 100.0 * np.asarray(x, dtype=float)  # levels in cm

    h1, h2 = p["level_1"], p["level_2"]
    link_flow = _orifice_flow(p["link"], h1 - h2)
    v1 = (link_flow + _orifice_flow(p["outlet_1"], h1)) / p["pump_gain"]
    v2 = (_orifice_flow(p["outlet_2"], h2) - link_flow) / p["pump_gain"]
    return NonlinearModel(
        stem="twin_tank_levels",
        dynamics=dynamics,
        outputs=outputs,
        operating_state=_array(h1, h2),
        operating_input=_array(v1, v2),
        disturbance_count=0,
        state_scale=_array(0.1, 0.1),
        input_scale=_array(5.0, 5.0),
        actuator_range=((0.0, 12.0), (0.0, 12.0)),
    )


# -- twin-rotor tilt beam (continuous model behind the sampled file) -----------------------------
# Newton's second law for rotation about the pivot: J θ'' = torque of the rotor thrust difference
# − pendulous gravity torque m g d sin θ − aerodynamic damping b θ'. Rotor thrust c_T Ω²
# (momentum theory / propeller practice, from memory); each rotor speed follows its command
# through a first-order lag. Both rotors start at Ω0 and receive Ω0 ± δcmd, so the mean speed
# stays Ω0 and δ = (Ω1 − Ω2)/2 is the only rotor state.
def _tilt_rig_model() -> NonlinearModel:
    inertia, beam_mass, offset, damping = 0.012, 0.45, 0.015, 0.004
    arm, thrust_coefficient, hover_speed, lag = 0.25, 1.6e-6, 600.0, 0.035
    g = GRAVITY

    def dynamics(x, u, d):
        angle, rate, half_difference = x
        (command,) = u
        fast, slow = hover_speed + half_difference, hover_speed - half_difference
        torque = arm * thrust_coefficient * (fast**2 - slow**2)
        angular_acc = (torque - beam_mass * g * offset * math.sin(angle) - damping * rate) / inertia
        return _array(rate, angular_acc, (command - half_difference) / lag)

    def outputs(x, u):
        return _array(math.degrees(x[0]))

    return NonlinearModel(
        stem="tilt_rig_sampled",
        dynamics=dynamics,
        outputs=outputs,
        operating_state=_array(0.0, 0.0, 0.0),
        operating_input=_array(0.0),
        disturbance_count=0,
        state_scale=_array(0.1, 1.0, 10.0),
        input_scale=_array(10.0),
        actuator_range=((-150.0, 150.0),),
        sample_time=0.002,
    )


# -- two identical pots on one heater plate ------------------------------------------------------
# Energy balance (first law of thermodynamics) for the heater plate and each pot: conduction
# G (T_hot − T_cold) (Fourier's law, lumped), convection to the room G_a (T − T_room) (Newton's law
# of cooling) and radiation ε σ A (T⁴ − T_room⁴) (Stefan–Boltzmann law) from each pot.
POT_PARAMETERS = dict(
    plate_capacity=450.0, pot_capacity=1800.0, contact=6.0, pot_convection=1.2, plate_convection=0.5,
    emissivity=0.9, pot_area=0.05, room=293.15, pot_temperature=333.15,
)


def _pot_losses(temperature: float) -> float:
    p = POT_PARAMETERS
    radiation = p["emissivity"] * STEFAN_BOLTZMANN * p["pot_area"] * (temperature**4 - p["room"] ** 4)
    return p["pot_convection"] * (temperature - p["room"]) + radiation


def _twin_pot_model() -> NonlinearModel:
    p = POT_PARAMETERS

    def dynamics(x, u, d):
        plate, pot_a, pot_b = x
        (power,) = u
        to_a = p["contact"] * (plate - pot_a)
        to_b = p["contact"] * (plate - pot_b)
        plate_rate = (power - to_a - to_b - p["plate_convection"] * (plate - p["room"])) / p["plate_capacity"]
        return _array(
            plate_rate,
            (to_a - _pot_losses(pot_a)) / p["pot_capacity"],
            (to_b - _pot_losses(pot_b)) / p["pot_capacity"],
        )

    def outputs(x, u):
        return _array(x[1], x[2], x[0])

    pot = p["pot_temperature"]
    plate = pot + _pot_losses(pot) / p["contact"]  # each pot in balance
    power = 2 * p["contact"] * (plate - pot) + p["plate_convection"] * (plate - p["room"])
    return NonlinearModel(
        stem="twin_pot_heater",
        dynamics=dynamics,
        outputs=outputs,
        operating_state=_array(plate, pot, pot),
        operating_input=_array(power),
        disturbance_count=0,
        state_scale=_array(10.0, 10.0, 10.0),
        input_scale=_array(50.0),
        actuator_range=((0.0, 400.0),),
    )


# -- arm on a geared DC motor --------------------------------------------------------------------
# Newton's second law for rotation of the arm (motor inertia reflected through the gear ratio
# squared), gravity torque m g l sin θ (θ from hanging straight down), viscous friction;
# Kirchhoff's voltage law for the armature with back-EMF k_e N θ'. Torque and back-EMF constants
# are equal in SI units (energy conservation in the motor, from memory).
ARM_PARAMETERS = dict(
    resistance=2.4, inductance=2.2e-3, motor_constant=0.032, gear_ratio=20.0, rotor_inertia=3.2e-6,
    arm_inertia=0.0048, arm_mass=0.25, arm_centre=0.12, friction=0.004, angle=0.6,
)


def _motor_arm_model() -> NonlinearModel:
    p = ARM_PARAMETERS
    g = GRAVITY
    inertia = p["arm_inertia"] + p["gear_ratio"] ** 2 * p["rotor_inertia"]
    torque_per_amp = p["gear_ratio"] * p["motor_constant"]

    def dynamics(x, u, d):
        angle, rate, current = x
        (voltage,) = u
        gravity = p["arm_mass"] * g * p["arm_centre"] * math.sin(angle)
        angular_acc = (torque_per_amp * current - p["friction"] * rate - gravity) / inertia
        current_rate = (voltage - p["resistance"] * current - torque_per_amp * rate) / p["inductance"]
        return _array(rate, angular_acc, current_rate)

    def outputs(x, u):
        return _array(math.degrees(x[0]), x[2])

    holding_current = p["arm_mass"] * g * p["arm_centre"] * math.sin(p["angle"]) / torque_per_amp
    return NonlinearModel(
        stem="motor_arm_servo",
        dynamics=dynamics,
        outputs=outputs,
        operating_state=_array(p["angle"], 0.0, holding_current),
        operating_input=_array(p["resistance"] * holding_current),
        disturbance_count=0,
        state_scale=_array(0.1, 1.0, 0.1),
        input_scale=_array(1.0),
        actuator_range=((-5.0, 5.0),),
    )


# -- quarter car with an active suspension -------------------------------------------------------
# Newton's second law for the body (sprung mass) and the wheel (unsprung mass); a progressive
# coil spring k δ + k3 δ³ (δ = compression), a linear damper, the actuator force u between body and
# wheel, and a linear tyre spring and damper that never leaves the road. The road height z_r moves
# with vertical velocity w (the disturbance). States: suspension extension e = z_s − z_u − ℓ, body
# velocity, tyre extension t = z_u − z_r − r, wheel velocity (extensions negative in compression).
CAR_PARAMETERS = dict(
    body_mass=320.0, wheel_mass=38.0, spring=14000.0, spring_hardening=2.5e5, damper=1100.0,
    tyre=190000.0, tyre_damping=50.0,
)


def _static_compression() -> float:
    """Solve k δ + k3 δ³ = m_s g for the static spring compression by Newton's method."""
    p = CAR_PARAMETERS
    weight = p["body_mass"] * GRAVITY
    compression = weight / p["spring"]
    for _ in range(60):
        residual = p["spring"] * compression + p["spring_hardening"] * compression**3 - weight
        compression -= residual / (p["spring"] + 3 * p["spring_hardening"] * compression**2)
    return compression


def _quarter_car_model() -> NonlinearModel:
    p = CAR_PARAMETERS
    g = GRAVITY

    def body_acceleration(x, u):
        extension, body_speed, _, wheel_speed = x
        (force,) = u
        compression = -extension
        spring = p["spring"] * compression + p["spring_hardening"] * compression**3
        return (spring + p["damper"] * (wheel_speed - body_speed) + force) / p["body_mass"] - g

    def dynamics(x, u, d):
        extension, body_speed, tyre_extension, wheel_speed = x
        (force,) = u
        (road_speed,) = d
        compression = -extension
        spring = p["spring"] * compression + p["spring_hardening"] * compression**3
        tyre_force = -p["tyre"] * tyre_extension + p["tyre_damping"] * (road_speed - wheel_speed)
        wheel_acc = (-spring - p["damper"] * (wheel_speed - body_speed) - force + tyre_force) / p["wheel_mass"] - g
        return _array(
            body_speed - wheel_speed,
            body_acceleration(x, u),
            wheel_speed - road_speed,
            wheel_acc,
        )

    def outputs(x, u):
        # body acceleration (m/s²), suspension deflection in mm, tyre deflection in mm
        return _array(body_acceleration(x, u), 1000.0 * x[0], 1000.0 * x[2])

    tyre_static = -(p["body_mass"] + p["wheel_mass"]) * g / p["tyre"]
    return NonlinearModel(
        stem="quarter_car_active",
        dynamics=dynamics,
        outputs=outputs,
        operating_state=_array(-_static_compression(), 0.0, tyre_static, 0.0),
        operating_input=_array(0.0),
        disturbance_count=1,
        state_scale=_array(0.01, 0.1, 0.001, 0.1),
        input_scale=_array(100.0),
        actuator_range=((-1500.0, 1500.0),),
    )


# -- planar stage carrying a payload on flexures -----------------------------------------------
# Newton's and Euler's laws for two rigid bodies moving in a horizontal plane: a stage floating
# on air bearings (viscous drag, no spring to ground) driven by three linear motors whose
# forces keep fixed directions in the room but act at points that turn with the stage, and a
# payload hung on four flexures, each an isotropic spring–damper between matching points of
# the stage and the payload (zero length at rest). The attachment points turn with each body
# (rotation matrices): the only nonlinearity, and what couples the yaw of either body into the
# forces. The payload's centre of mass sits off the middle of its flexures, so its translation
# and yaw are coupled. A cable pulls the payload along x (the disturbance).
STAGE_PARAMETERS = dict(
    stage_mass=4.2, stage_inertia=0.031, payload_mass=1.3, payload_inertia=0.0065,
    flexure_stiffness=4000.0, flexure_damping=2.5, bearing_damping=8.0, bearing_yaw_damping=0.02,
    flexure_half_span=0.06, payload_offset=(0.02, -0.01),
    motor_points=((0.0, 0.08), (0.0, -0.08), (0.05, 0.0)),
    motor_directions=((1.0, 0.0), (1.0, 0.0), (0.0, 1.0)),
)


def _rotation(angle):
    # written with numpy so that a complex angle (complex-step derivatives) passes through
    c, s = np.cos(angle), np.sin(angle)
    return np.array([[c, -s], [s, c]])


def _turned(angle, point):
    """∂(R(θ)·point)/∂θ = R(θ)·J·point (J a quarter turn): the velocity of a body point per unit yaw rate."""
    return _rotation(angle) @ np.array([-point[1], point[0]])


def _cross(a, b):
    return a[0] * b[1] - a[1] * b[0]


def _flexure_stage_model() -> NonlinearModel:
    p = STAGE_PARAMETERS
    half = p["flexure_half_span"]
    offset = np.array(p["payload_offset"], dtype=float)
    # flexure points relative to the stage's centre of mass at rest, and the same points seen
    # from the payload's centre of mass
    corners = [np.array([sx * half, sy * half]) for sx in (1.0, -1.0) for sy in (1.0, -1.0)]
    on_payload = [corner - offset for corner in corners]
    motor_points = [np.array(point, dtype=float) for point in p["motor_points"]]
    motor_directions = [np.array(direction, dtype=float) for direction in p["motor_directions"]]

    def dynamics(x, u, d):
        sx, sy, sa, px, py, pa = x[0], x[2], x[4], x[6], x[8], x[10]
        svx, svy, sw, pvx, pvy, pw = x[1], x[3], x[5], x[7], x[9], x[11]
        stage_r, stage_v = np.array([sx, sy]), np.array([svx, svy])
        payload_r, payload_v = np.array([px, py]), np.array([pvx, pvy])
        stage_turn, payload_turn = _rotation(sa), _rotation(pa)
        stage_force = -p["bearing_damping"] * stage_v
        stage_torque = -p["bearing_yaw_damping"] * sw
        for force, point, direction in zip(u, motor_points, motor_directions):
            stage_force = stage_force + force * direction
            stage_torque = stage_torque + _cross(stage_turn @ point, force * direction)
        payload_force = np.array([d[0], 0.0 * d[0]])
        payload_torque = 0.0 * d[0]
        for corner, point in zip(corners, on_payload):
            on_stage_at = stage_r + stage_turn @ corner
            on_payload_at = payload_r + payload_turn @ point
            stage_point_speed = stage_v + sw * _turned(sa, corner)
            payload_point_speed = payload_v + pw * _turned(pa, point)
            pull = (-p["flexure_stiffness"] * (on_payload_at - on_stage_at)
                    - p["flexure_damping"] * (payload_point_speed - stage_point_speed))
            payload_force = payload_force + pull
            payload_torque = payload_torque + _cross(payload_turn @ point, pull)
            stage_force = stage_force - pull
            stage_torque = stage_torque - _cross(stage_turn @ corner, pull)
        stage_acc = stage_force / p["stage_mass"]
        payload_acc = payload_force / p["payload_mass"]
        return np.array([
            svx, stage_acc[0], svy, stage_acc[1], sw, stage_torque / p["stage_inertia"],
            pvx, payload_acc[0], pvy, payload_acc[1], pw, payload_torque / p["payload_inertia"],
        ])

    def outputs(x, u):
        # payload position in mm from its rest point, payload yaw in mrad
        return np.array([1000.0 * (x[6] - offset[0]), 1000.0 * (x[8] - offset[1]), 1000.0 * x[10]])

    operating = np.zeros(12)
    operating[6], operating[8] = offset
    return NonlinearModel(
        stem="flexure_stage_xy",
        dynamics=dynamics,
        outputs=outputs,
        operating_state=operating,
        operating_input=_array(0.0, 0.0, 0.0),
        disturbance_count=1,
        state_scale=_array(1e-3, 0.01, 1e-3, 0.01, 1e-3, 0.01, 1e-3, 0.01, 1e-3, 0.01, 1e-3, 0.01),
        input_scale=_array(10.0, 10.0, 10.0),
        actuator_range=((-40.0, 40.0), (-40.0, 40.0), (-40.0, 40.0)),
    )


NONLINEAR_MODELS: dict[str, NonlinearModel] = {
    model.stem: model
    for model in (
        _maglev_model(),
        _cart_pendulum_model(),
        _spring_carts_model(),
        _twin_tank_model(),
        _tilt_rig_model(),
        _twin_pot_model(),
        _motor_arm_model(),
        _quarter_car_model(),
        _flexure_stage_model(),
    )
}
