// Types of the rig description (one JSON file per physical set-up: propeller, motor, ESC, optional duct,
// supply). Lengths in metres, masses in kilograms, as the field names say. The validator lives in rig.ts;
// the prediction model and the virtual bench both read this shape (the virtual bench adds its own `sim`
// section of "truth" constants that the model never sees).

export interface PropellerSpec {
  diameter_m: number;
  pitch_m: number;
  blades: number;
  /** Optional blade geometry by radius station (r / R from hub to tip). */
  geometry?: { r_over_R: number[]; chord_m: number[]; twist_deg: number[] };
  /** Optional measured static coefficients (CT = T / (rho n^2 D^4), CP = P / (rho n^3 D^5), n in rev/s). */
  static_table?: { rpm: number[]; ct: number[]; cp: number[] };
  mass_kg?: number;
}

export interface MotorSpec {
  kv_rpm_per_v: number;
  resistance_ohm: number;
  no_load_current_a: number;
  /** Voltage at which the no-load current was measured. */
  no_load_voltage_v: number;
  mass_kg: number;
}

export interface EscSpec {
  /** Either a constant efficiency or a series resistance. */
  efficiency?: number;
  resistance_ohm?: number;
  /** How throttle maps to motor voltage: "voltage" (duty cycle scales the bus voltage; the default). */
  throttle_map?: 'voltage';
}

export interface DuctSpec {
  /** Bore at the rotor plane; tip clearance = (bore - propeller diameter) / 2. */
  bore_diameter_m: number;
  inlet_lip_radius_m: number;
  /** Exit diameter; sigma = exit area / rotor disk area. */
  exit_diameter_m: number;
  length_m: number;
  mass_kg: number;
}

export interface SupplySpec {
  /** Lithium-polymer cells in series, or a fixed bench-supply voltage. */
  cells?: number;
  voltage_v?: number;
  internal_resistance_ohm: number;
  /** Pack capacity, for endurance estimates. */
  capacity_mah?: number;
}

export interface RigSpec {
  name: string;
  description?: string;
  propeller: PropellerSpec;
  motor: MotorSpec;
  esc: EscSpec;
  duct: DuctSpec | null;
  supply: SupplySpec;
  /** Host limits (see the interlocks); validated by their own schema. */
  limits?: Record<string, number>;
  /** Virtual-bench truth constants; ignored by the prediction model. */
  sim?: Record<string, unknown>;
}
