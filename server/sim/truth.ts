// The virtual bench's physical "truth": battery, ESC, brushless motor, propeller and optional duct, stepped
// in time. It is deliberately a different model from the prediction model (server/model/), with effects the
// predictor has to discover by calibration: Reynolds-dependent propeller coefficients, a profile-drag
// factor, speed-dependent iron losses, winding resistance rising with temperature (two-node thermal model),
// battery sag with a slow polarisation part and state of charge, an ESC start dead-band and braking, and a
// duct whose response is tabulated (ductFactors below), sharing no formula with the model. Pure numbers: no clocks, no I/O, no noise
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
  /** Exit-area ratio the diffuser is credited with after stall (between the bore's and the exit's). */
  sigmaCredited: number;
  /** Fraction of the augmentation the tip gap leaves (table GAP_RETENTION). */
  gapKept: number;
  /** Fraction of the augmentation the inlet lip leaves (table LIP_RETENTION). */
  lipKept: number;
  /** Fraction of the exit area beyond the bore the diffuser is credited with (table DIFFUSER_CREDIT). */
  diffuserCredit: number;
  /** Fraction of the thrust a stalled diffuser costs (table STALL_PENALTY). */
  stallPenalty: number;
  /** Thrust multiplier at equal rpm and so at equal shaft power: what the truth applies. */
  thrustRatio: number;
  tipClearanceM: number;
  /** Half-angle of the diffuser behind the rotor, degrees. */
  diffuserHalfAngleDeg: number;
  /** Total included angle at which this diffuser starts to stall, degrees (shorter diffusers hold more). */
  stallOnsetTotalDeg: number;
}

// The bench's duct is a TABULATED RESPONSE of its own, deliberately unlike the prediction model
// (server/model/duct-losses.ts, which works from a momentum balance with loss coefficients): the thrust a
// duct adds at the same rotor speed, read from tables against the tip gap over the radius, the lip radius
// over the radius, the exit-area ratio and the diffuser's stall margin in total included angle. The shapes
// are invented but follow the published hover tests of small shrouded rotors and ducted fans (tight gaps
// nearly free, most of the gain gone by a few percent of the radius; lip gains growing to about a third of
// the radius; an optimum diffuser, and stall that costs thrust), so that a model calibrated against this
// bench has to find its duct by measurement, not by sharing a formula. Nothing here is imported from the
// model (test/sim-independence.test.ts).

/** Thrust at equal rotor speed over the open rotor's, for a perfect duct, by credited exit-area ratio. */
const AUGMENTATION: readonly [number, number][] = [
  [0.5, 1.0],
  [0.7, 1.1],
  [0.85, 1.17],
  [1.0, 1.22],
  [1.15, 1.26],
  [1.3, 1.29],
  [1.45, 1.31],
  [1.6, 1.32],
  [2.0, 1.33],
];

/** Fraction of the augmentation kept, by tip gap over rotor radius. */
const GAP_RETENTION: readonly [number, number][] = [
  [0, 1],
  [0.002, 0.98],
  [0.005, 0.93],
  [0.01, 0.8],
  [0.015, 0.66],
  [0.02, 0.53],
  [0.03, 0.34],
  [0.04, 0.22],
  [0.06, 0.09],
  [0.1, 0.02],
  [0.2, 0],
];

/** Fraction of the augmentation kept, by inlet lip radius over rotor radius. */
const LIP_RETENTION: readonly [number, number][] = [
  [0, 0.45],
  [0.02, 0.6],
  [0.05, 0.74],
  [0.1, 0.86],
  [0.15, 0.93],
  [0.2, 0.97],
  [0.3, 1],
];

/** Fraction of the exit area beyond the bore that counts, by total angle beyond the stall onset, degrees. */
const DIFFUSER_CREDIT: readonly [number, number][] = [
  [0, 1],
  [4, 0.8],
  [8, 0.5],
  [14, 0.2],
  [20, 0],
];

/** Fraction of the thrust lost to a stalled diffuser, by total angle beyond the stall onset, degrees. */
const STALL_PENALTY: readonly [number, number][] = [
  [0, 0],
  [6, 0.01],
  [12, 0.03],
  [20, 0.05],
  [40, 0.07],
];

/** Stall onset total angle against diffuser length over bore: short diffusers tolerate wider angles. */
const STALL_ONSET_BY_LENGTH: readonly [number, number][] = [
  [0.1, 30],
  [0.2, 25],
  [0.35, 21],
  [0.5, 19],
  [1, 15],
  [2, 11],
];

/** Piecewise-linear lookup, held at the end values. */
function lookup(table: readonly [number, number][], x: number): number {
  if (x <= table[0][0]) return table[0][1];
  for (let k = 1; k < table.length; k++) {
    const [x1, y1] = table[k];
    if (x <= x1) {
      const [x0, y0] = table[k - 1];
      return y0 + ((y1 - y0) * (x - x0)) / (x1 - x0);
    }
  }
  return table[table.length - 1][1];
}

/** Duct truth: the thrust multiplier at equal rotor speed, from the tables above. */
export function ductFactors(rig: RigSpec, k: SimConstants): DuctFactors | null {
  const duct = rig.duct;
  if (!duct) return null;
  const D = rig.propeller.diameter_m;
  const R = D / 2;
  const sigma = (duct.exit_diameter_m / D) ** 2;
  const sigmaBore = (duct.bore_diameter_m / D) ** 2;
  const gap = Math.max(0, (duct.bore_diameter_m - D) / 2);
  // The diffuser starts behind the rotor, which sits duct_rotor_position of the way down from the inlet.
  const behind = Math.max(1e-6, duct.length_m * (1 - k.duct_rotor_position));
  const halfAngle = (Math.atan(Math.abs(duct.exit_diameter_m - duct.bore_diameter_m) / 2 / behind) * 180) / Math.PI;
  const onset = lookup(STALL_ONSET_BY_LENGTH, behind / duct.bore_diameter_m) * k.diffuser_stall_factor;
  const beyond = 2 * halfAngle - onset;
  const credit = sigma > sigmaBore ? lookup(DIFFUSER_CREDIT, beyond) : 1;
  const penalty = sigma > sigmaBore ? lookup(STALL_PENALTY, beyond) : 0;
  const sigmaCredited = sigma > sigmaBore ? sigmaBore + (sigma - sigmaBore) * credit : sigma;
  const gapKept = lookup(GAP_RETENTION, (gap / R) * k.duct_gap_sensitivity);
  const lipKept = lookup(LIP_RETENTION, duct.inlet_lip_radius_m / R / k.duct_lip_scale);
  const augmentation = lookup(AUGMENTATION, sigmaCredited) - 1;
  const wall = Math.max(0, 1 - k.duct_wall_friction * (duct.length_m / D));
  const thrustRatio = (1 + augmentation * k.duct_efficiency * gapKept * lipKept) * (1 - penalty) * wall;
  return {
    sigma,
    sigmaCredited,
    gapKept,
    lipKept,
    diffuserCredit: credit,
    stallPenalty: penalty,
    thrustRatio,
    tipClearanceM: gap,
    diffuserHalfAngleDeg: halfAngle,
    stallOnsetTotalDeg: onset,
  };
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
