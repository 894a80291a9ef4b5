// The virtual bench's physical "truth": battery, ESC, brushless motor, propeller and optional duct, stepped
// in time. It is deliberately a different model from the prediction model (server/model/), with effects the
// predictor has to discover by calibration: Reynolds-dependent propeller coefficients, a profile-drag
// factor, speed-dependent iron losses, winding resistance rising with temperature (two-node thermal model),
// battery sag with a slow polarisation part and state of charge, an ESC start dead-band and braking, and a
// duct that realises only part of the momentum-theory benefit. Pure numbers: no clocks, no I/O, no noise
// (sensor noise and offsets belong to the sensors, not to the physics).

import type { RigSpec } from '../model/rig-types.js';
import type { SimConstants } from './sim-constants.js';

const TWO_PI = 2 * Math.PI;
const SQRT_2_OVER_PI = Math.sqrt(2 / Math.PI);

/** Open-circuit voltage of one lithium-polymer cell against state of charge (common practice shape). */
const LIPO_OCV: readonly [number, number][] = [
  [0, 3.3],
  [0.05, 3.55],
  [0.1, 3.65],
  [0.2, 3.72],
  [0.4, 3.8],
  [0.6, 3.88],
  [0.8, 4.0],
  [0.9, 4.08],
  [1, 4.2],
];

export function lipoCellOcv(soc: number): number {
  const s = Math.min(1, Math.max(0, soc));
  for (let k = 1; k < LIPO_OCV.length; k++) {
    const [s1, v1] = LIPO_OCV[k];
    if (s <= s1) {
      const [s0, v0] = LIPO_OCV[k - 1];
      return v0 + ((v1 - v0) * (s - s0)) / (s1 - s0);
    }
  }
  return LIPO_OCV[LIPO_OCV.length - 1][1];
}

/** What the duct does, worked out once from its geometry (see ductFactors). */
export interface DuctFactors {
  /** Geometric exit-area ratio. */
  sigma: number;
  /** Exit-area ratio the diffuser actually holds (limited, and reduced when it separates). */
  sigmaEffective: number;
  /** Fraction of the ideal benefit realised (efficiency x lip x clearance). */
  realisation: number;
  /** Induced power at equal thrust, ducted over open. */
  inducedPowerRatio: number;
  /** Thrust multiplier at equal shaft power (and so at equal rpm in this model). */
  thrustRatio: number;
  tipClearanceM: number;
  diffuserHalfAngleDeg: number;
}

/**
 * Duct truth. Momentum theory gives P_ducted / P_open = 1 / sqrt(2 sigma) at equal thrust; this duct realises
 * only part of that gap, less with a wide tip gap, more with a generous inlet lip, and a diffuser that opens
 * faster than it can hold attached flow loses its extra exit area.
 */
export function ductFactors(rig: RigSpec, k: SimConstants): DuctFactors | null {
  const duct = rig.duct;
  if (!duct) return null;
  const D = rig.propeller.diameter_m;
  const R = D / 2;
  const diskArea = (Math.PI * D * D) / 4;
  const sigma = (Math.PI * duct.exit_diameter_m * duct.exit_diameter_m) / 4 / diskArea;
  const gap = Math.max(0, (duct.bore_diameter_m - D) / 2);
  const behind = Math.max(1e-6, duct.length_m * (1 - k.duct_rotor_position));
  const halfAngle = (Math.atan(Math.abs(duct.exit_diameter_m - duct.bore_diameter_m) / 2 / behind) * 180) / Math.PI;
  let sigmaEff = Math.min(sigma, k.duct_sigma_limit);
  if (sigmaEff > 1 && halfAngle > k.diffuser_max_half_angle_deg) {
    // Separated diffuser: the extra exit area fades out over the next max-angle's worth of opening.
    const over = (halfAngle - k.diffuser_max_half_angle_deg) / Math.max(1e-6, k.diffuser_max_half_angle_deg);
    sigmaEff = 1 + (sigmaEff - 1) * Math.max(0, 1 - over);
  }
  // Below sigma 0.5 a "duct" is a nozzle that costs power; momentum theory still holds, so no floor needed
  // beyond keeping the square root real.
  sigmaEff = Math.max(0.05, sigmaEff);
  const lip = 1 - k.duct_lip_penalty * Math.exp(-duct.inlet_lip_radius_m / (k.duct_lip_scale * D));
  const clearance = Math.exp(-gap / (k.duct_clearance_scale * R));
  const realisation = k.duct_efficiency * lip * clearance;
  const idealRatio = 1 / Math.sqrt(2 * sigmaEff);
  const inducedPowerRatio = 1 - realisation * (1 - idealRatio);
  const wall = Math.max(0, 1 - k.duct_wall_friction * (duct.length_m / D));
  // Equal induced power P ~ r T^1.5: the same rotor work buys r^(-2/3) more thrust.
  const thrustRatio = Math.pow(inducedPowerRatio, -2 / 3) * wall;
  return { sigma, sigmaEffective: sigmaEff, realisation, inducedPowerRatio, thrustRatio, tipClearanceM: gap, diffuserHalfAngleDeg: halfAngle };
}

/** Everything the physics knows at one instant (SI units; temperatures in degC). */
export interface TruthState {
  /** ESC output the physics received (0..1). */
  out: number;
  duty: number;
  omegaRadS: number;
  rpm: number;
  thrustN: number;
  /** Reaction torque on the stand (equals the aerodynamic torque). */
  torqueNm: number;
  shaftPowerW: number;
  busVoltageV: number;
  busCurrentA: number;
  motorCurrentA: number;
  motorVoltageV: number;
  windingC: number;
  caseC: number;
  windingResistanceOhm: number;
  soc: number;
  /** Supply open-circuit voltage (pack OCV from state of charge, or the bench supply setting). */
  supplyOcvV: number;
}

/** Changes a fault injection makes to the physics (see faults.ts). */
export interface TruthModifiers {
  /** Rotor jammed: held at zero speed. */
  stalled: boolean;
  /** Fraction of the propeller still attached (1 intact; a thrown blade leaves a stub). */
  propFraction: number;
  /** Extra bus current drawn while the ESC drives (a phase short), in amperes. */
  extraCurrentA: number;
  /** Supply collapses to this open-circuit voltage (connector fault, dying pack), or null. */
  supplyDipV: number | null;
}

export class TruthModel {
  readonly duct: DuctFactors | null;
  readonly mods: TruthModifiers = { stalled: false, propFraction: 1, extraCurrentA: 0, supplyDipV: null };
  private readonly kvRad: number;
  private readonly ctStatic: number;
  private readonly cpProfile: number;
  private readonly inertiaProp: number;
  private readonly inertiaMotor: number;
  private readonly escEff: number;
  private readonly escRes: number;
  private readonly omegaNoLoadRef: number;
  private omega = 0;
  private duty = 0;
  private windingC: number;
  private caseC: number;
  private soc: number;
  private vPolar = 0;
  private last: TruthState;

  constructor(
    private readonly rig: RigSpec,
    private readonly k: SimConstants,
  ) {
    const p = rig.propeller;
    const pd = p.pitch_m / p.diameter_m;
    // Invented but plausible static trends for small two-blade propellers: thrust and power coefficients
    // both grow with pitch ratio, power faster (a 10x4.5 lands near CT 0.105, FM near 0.6).
    const bladeScale = p.blades / 2;
    this.ctStatic = k.ct_static > 0 ? k.ct_static : Math.min(0.25, Math.max(0.04, (0.035 + 0.155 * pd) * Math.pow(bladeScale, 0.6)));
    this.cpProfile = k.cp_profile > 0 ? k.cp_profile : (0.009 + 0.02 * pd * pd) * bladeScale;
    const propMass = p.mass_kg ?? 0.015 * Math.pow(p.diameter_m / 0.254, 2.5);
    // A blade is roughly a slender rod from hub to tip: m L^2 / 12 over the full span, scaled down for the
    // thin tips.
    this.inertiaProp = k.inertia_kg_m2 > 0 ? k.inertia_kg_m2 : 0.7 * ((propMass * p.diameter_m * p.diameter_m) / 12);
    // Outrunner bell: about a third of the motor mass at a radius near 15 mm.
    this.inertiaMotor = k.inertia_kg_m2 > 0 ? 0 : (rig.motor.mass_kg / 3) * 0.015 * 0.015;
    this.kvRad = (rig.motor.kv_rpm_per_v * TWO_PI) / 60;
    this.omegaNoLoadRef = this.kvRad * rig.motor.no_load_voltage_v;
    this.escEff = rig.esc.efficiency ?? (rig.esc.resistance_ohm !== undefined ? 1 : k.esc_efficiency_default);
    this.escRes = rig.esc.resistance_ohm ?? 0;
    this.duct = ductFactors(rig, k);
    this.windingC = k.ambient_c;
    this.caseC = k.ambient_c;
    this.soc = rig.supply.cells ? k.initial_soc : 1;
    this.last = this.compute(0, 0);
  }

  /** Static thrust and power coefficients the truth uses at an rpm (before any duct). */
  coefficients(rpm: number): { ct: number; cp: number; cpInduced: number; cpProfile: number } {
    const r = Math.min(40000, Math.max(500, rpm)) / this.k.ref_rpm;
    const ct = this.ctStatic * Math.max(0.2, 1 + this.k.ct_re_slope * Math.log(r));
    const cpInduced = this.k.kappa_induced * SQRT_2_OVER_PI * Math.pow(ct, 1.5);
    const cpProfile = this.cpProfile * this.k.profile_drag_factor * Math.pow(r, this.k.cp_re_exponent);
    return { ct, cp: cpInduced + cpProfile, cpInduced, cpProfile };
  }

  get state(): Readonly<TruthState> {
    return this.last;
  }

  /** Advances the physics by dt seconds with the ESC receiving `out` (0..1). */
  step(dt: number, out: number): void {
    const s = this.compute(out, dt);
    this.last = s;
  }

  private supplyOcv(): number {
    const sup = this.rig.supply;
    let e = sup.cells ? sup.cells * lipoCellOcv(this.soc) : (sup.voltage_v ?? 0);
    if (this.mods.supplyDipV !== null) e = Math.min(e, this.mods.supplyDipV);
    return e;
  }

  private compute(out: number, dt: number): TruthState {
    const k = this.k;
    const m = this.rig.motor;
    const D = this.rig.propeller.diameter_m;
    const rho = k.air_density_kg_m3;
    const kt = 1 / this.kvRad;
    const rw = m.resistance_ohm * (1 + k.copper_alpha_per_k * (this.windingC - 20));
    const rLoop = rw + this.escRes;
    const r0 = this.rig.supply.internal_resistance_ohm;
    const eOc = this.supplyOcv();
    const eff = this.escEff;

    const o = Math.min(1, Math.max(0, out));
    const target = o <= k.esc_deadband ? 0 : Math.min(0.98, (o - k.esc_deadband) / (1 - k.esc_deadband));
    // Soft start upwards only: a cut reaches the windings at once.
    const duty = target < this.duty ? target : Math.min(target, this.duty + k.esc_ramp_per_s * dt);
    if (dt > 0) this.duty = duty;
    if (this.mods.stalled) this.omega = 0;
    const omega = this.omega;
    const backEmf = omega / this.kvRad;
    const idle = k.esc_idle_current_a;
    const extra = duty > 0 ? this.mods.extraCurrentA : 0;
    // The supply source seen by the ESC, including the slow polarisation part of the sag.
    const e = eOc - this.vPolar;

    let busV: number;
    let motorI: number;
    let motorV: number;
    let busI: number;
    if (duty > 0) {
      // Quasi-static loop (winding inductance neglected at these speeds): motor current from the duty-scaled
      // bus, bus current from power balance through the ESC, bus voltage from the supply's resistance. Linear
      // in the bus voltage, so solved in closed form.
      const g = (r0 * duty) / (eff * rLoop);
      busV = (e - r0 * (idle + extra) + g * backEmf) / (1 + g * duty);
      motorI = (duty * busV - backEmf) / rLoop;
      if (motorI < 0) {
        // Back-EMF above the applied voltage: the freewheel diodes block, the motor coasts.
        motorI = 0;
        busV = e - r0 * (idle + extra);
      }
      busI = (duty * motorI) / eff + idle + extra;
      motorV = backEmf + motorI * rw;
    } else if (k.esc_brake && omega > 0) {
      // Brake: the low-side switches short the windings, so the generated current circulates in the motor
      // and none flows from the bus.
      motorI = -backEmf / rw;
      busI = idle;
      busV = e - r0 * idle;
      motorV = 0;
    } else {
      motorI = 0;
      busI = idle;
      busV = e - r0 * idle;
      motorV = backEmf;
    }

    // No-load current: a constant friction part and an iron-loss part growing with speed.
    const f = k.iron_loss_speed_fraction;
    const i0 = m.no_load_current_a * (1 - f + (f * omega) / Math.max(1, this.omegaNoLoadRef));
    const lossTorque = omega > 0 ? kt * i0 : 0;

    const n = omega / TWO_PI;
    const rpm = n * 60;
    const c = this.coefficients(rpm);
    const frac = this.mods.propFraction;
    let thrust = c.ct * rho * n * n * D ** 4 * frac;
    const shaftPower = c.cp * rho * n * n * n * D ** 5 * frac;
    if (this.duct) thrust *= this.duct.thrustRatio;
    const aeroTorque = omega > 0 ? shaftPower / omega : 0;

    if (dt > 0) {
      const j = this.inertiaMotor + this.inertiaProp * frac;
      const motorTorque = kt * motorI - lossTorque;
      let next = omega + ((motorTorque - aeroTorque) / j) * dt;
      if (next < 0 || this.mods.stalled) next = 0;
      this.omega = next;

      const copper = motorI * motorI * rw;
      const iron = lossTorque * omega;
      const rca = k.case_to_ambient_k_per_w / (1 + (k.cooling_gain * rpm) / 10000);
      const toCase = (this.windingC - this.caseC) / k.winding_to_case_k_per_w;
      const toAir = (this.caseC - k.ambient_c) / rca;
      this.windingC += ((copper + iron - toCase) / k.winding_heat_capacity_j_per_k) * dt;
      this.caseC += ((toCase - toAir) / k.case_heat_capacity_j_per_k) * dt;

      if (this.rig.supply.cells) {
        const capAs = ((this.rig.supply.capacity_mah ?? 2200) / 1000) * 3600;
        this.soc = Math.max(0, this.soc - (busI * dt) / capAs);
        const tau = k.polarisation_time_s;
        const target = busI * r0 * k.polarisation_fraction;
        this.vPolar += (target - this.vPolar) * Math.min(1, dt / tau);
      }
    }

    return {
      out: o,
      duty,
      omegaRadS: omega,
      rpm,
      thrustN: thrust,
      torqueNm: aeroTorque,
      shaftPowerW: shaftPower,
      busVoltageV: busV,
      busCurrentA: busI,
      motorCurrentA: motorI,
      motorVoltageV: motorV,
      windingC: this.windingC,
      caseC: this.caseC,
      windingResistanceOhm: rw,
      soc: this.soc,
      supplyOcvV: eOc,
    };
  }
}
